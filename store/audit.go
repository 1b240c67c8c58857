package store

// The audit trail, and the small read and write helpers every file of the
// package uses.

import (
	"encoding/json"
	"fmt"
	"time"

	bolt "go.etcd.io/bbolt"
)

// AuditEntry is one line of the append-only audit trail.
type AuditEntry struct {
	N      uint64    `json:"n"`      // entry number, from 0
	Time   time.Time `json:"time"`   // when, UTC
	Source string    `json:"source"` // who or what: a command line or a request
	Action string    `json:"action"` // what kind of change: "init", "items.add", "labels.add", …
	Detail string    `json:"detail"` // what changed, in words
}

func (s *Store) audit(tx *bolt.Tx, source, action, detail string) error {
	b := tx.Bucket(bAudit)
	n := b.Sequence()
	e := AuditEntry{N: n, Time: s.now(), Source: source, Action: action, Detail: detail}
	if err := putJSON(b, u64(n), e); err != nil {
		return err
	}
	return b.SetSequence(n + 1)
}

// Record adds an entry to the audit trail for a change made outside the
// store's own write methods (for example a file written next to the project).
func (s *Store) Record(source, action, detail string) error {
	return s.write(func(tx *bolt.Tx) error { return s.audit(tx, source, action, detail) })
}

// Audit returns the audit trail, oldest first.
func (s *Store) Audit() ([]AuditEntry, error) {
	var out []AuditEntry
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bAudit).ForEach(func(k, v []byte) error {
			var e AuditEntry
			if err := json.Unmarshal(v, &e); err != nil {
				return err
			}
			out = append(out, e)
			return nil
		})
	})
	return out, err
}

// update runs fn in a write transaction and records an audit entry with it.
func (s *Store) update(source, action, detail string, fn func(tx *bolt.Tx) error) error {
	return s.write(func(tx *bolt.Tx) error {
		if err := fn(tx); err != nil {
			return err
		}
		return s.audit(tx, source, action, detail)
	})
}

func (s *Store) get(bucket, key []byte) ([]byte, error) {
	var out []byte
	err := s.db.View(func(tx *bolt.Tx) error {
		v := tx.Bucket(bucket).Get(key)
		if v == nil {
			return fmt.Errorf("%s %q: %w", bucket, key, ErrNotFound)
		}
		out = append([]byte(nil), v...)
		return nil
	})
	return out, err
}

func (s *Store) each(bucket []byte, fn func(k, v []byte) error) error {
	return s.db.View(func(tx *bolt.Tx) error { return tx.Bucket(bucket).ForEach(fn) })
}

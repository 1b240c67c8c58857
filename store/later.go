package store

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"sync"
	"sync/atomic"
	"time"

	bolt "go.etcd.io/bbolt"

	"handoff"
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

// ---- consensus ----

// PutConsensus replaces all consensus with cs (one per item, items must
// exist) and stores meta (free-form bytes from the caller, e.g. JSON with the
// method, its settings and annotator reliabilities) beside it.
func (s *Store) PutConsensus(cs []handoff.Consensus, meta []byte, source string) error {
	return s.update(source, "consensus.put", fmt.Sprintf("%d items", len(cs)), func(tx *bolt.Tx) error {
		return putConsensus(tx, cs, meta)
	})
}

func putConsensus(tx *bolt.Tx, cs []handoff.Consensus, meta []byte) error {
	if err := tx.DeleteBucket(bConsensus); err != nil {
		return err
	}
	b, err := tx.CreateBucket(bConsensus)
	if err != nil {
		return err
	}
	ids := tx.Bucket(bItemIDs)
	for _, c := range cs {
		if ids.Get([]byte(c.Item)) == nil {
			return dataErr("item", "consensus for unknown item %q", c.Item)
		}
		if err := putJSON(b, []byte(c.Item), c); err != nil {
			return err
		}
	}
	return tx.Bucket(bMeta).Put(kConsensusMeta, append([]byte(nil), meta...))
}

// Consensus returns all consensus, ordered by item id, and the meta bytes
// stored with it (nil if none was ever stored).
func (s *Store) Consensus() ([]handoff.Consensus, []byte, error) {
	var out []handoff.Consensus
	var meta []byte
	err := s.db.View(func(tx *bolt.Tx) error {
		if m := tx.Bucket(bMeta).Get(kConsensusMeta); m != nil {
			meta = append([]byte(nil), m...)
		}
		return tx.Bucket(bConsensus).ForEach(func(k, v []byte) error {
			var c handoff.Consensus
			if err := json.Unmarshal(v, &c); err != nil {
				return err
			}
			out = append(out, c)
			return nil
		})
	})
	return out, meta, err
}

// ConsensusFor returns one item's consensus, or ErrNotFound.
func (s *Store) ConsensusFor(item string) (handoff.Consensus, error) {
	var c handoff.Consensus
	v, err := s.get(bConsensus, []byte(item))
	if err != nil {
		return c, err
	}
	err = json.Unmarshal(v, &c)
	return c, err
}

// ---- models ----

// PutModel stores a model file under a version name (replacing one of the
// same name) and makes it the latest.
func (s *Store) PutModel(version string, data []byte, source string) error {
	if version == "" {
		return dataErr("version", "empty model version")
	}
	return s.update(source, "model.put", fmt.Sprintf("model %q, %d bytes", version, len(data)), func(tx *bolt.Tx) error {
		return putModel(tx, version, data)
	})
}

func putModel(tx *bolt.Tx, version string, data []byte) error {
	if version == "" {
		return dataErr("version", "empty model version")
	}
	if err := tx.Bucket(bModels).Put([]byte(version), append([]byte(nil), data...)); err != nil {
		return err
	}
	o := tx.Bucket(bModelOrder)
	n := o.Sequence()
	if err := o.Put(u64(n), []byte(version)); err != nil {
		return err
	}
	return o.SetSequence(n + 1)
}

// Model returns the model file stored under version, or ErrNotFound.
func (s *Store) Model(version string) ([]byte, error) { return s.get(bModels, []byte(version)) }

// LatestModel returns the version and bytes of the model stored last, or
// ErrNotFound if there is none.
func (s *Store) LatestModel() (string, []byte, error) {
	var version string
	var data []byte
	err := s.db.View(func(tx *bolt.Tx) error {
		_, v := tx.Bucket(bModelOrder).Cursor().Last()
		if v == nil {
			return fmt.Errorf("model: %w", ErrNotFound)
		}
		version = string(v)
		data = append([]byte(nil), tx.Bucket(bModels).Get(v)...)
		return nil
	})
	return version, data, err
}

// Models returns the stored model versions in the order they were stored
// (a version stored twice appears at its last place).
func (s *Store) Models() ([]string, error) {
	var all []string
	if err := s.each(bModelOrder, func(k, v []byte) error { all = append(all, string(v)); return nil }); err != nil {
		return nil, err
	}
	last := map[string]int{}
	for i, v := range all {
		last[v] = i
	}
	var out []string
	for i, v := range all {
		if last[v] == i {
			out = append(out, v)
		}
	}
	return out, nil
}

// ---- rounds and selections ----

// PutRound stores the record of round n (free-form bytes, e.g. JSON),
// replacing any earlier record of the same round.
func (s *Store) PutRound(n int, data []byte, source string) error {
	return s.update(source, "round.put", fmt.Sprintf("round %d, %d bytes", n, len(data)), func(tx *bolt.Tx) error {
		return tx.Bucket(bRounds).Put(u64(uint64(n)), append([]byte(nil), data...))
	})
}

// Round returns the record of round n, or ErrNotFound.
func (s *Store) Round(n int) ([]byte, error) { return s.get(bRounds, u64(uint64(n))) }

// Numbered is a record stored under a number (a round or a selection).
type Numbered struct {
	N    int
	Data []byte
}

// Rounds returns every round record in round order.
func (s *Store) Rounds() ([]Numbered, error) { return s.numbered(bRounds) }

func (s *Store) numbered(bucket []byte) ([]Numbered, error) {
	var out []Numbered
	err := s.each(bucket, func(k, v []byte) error {
		out = append(out, Numbered{N: int(binary.BigEndian.Uint64(k)), Data: append([]byte(nil), v...)})
		return nil
	})
	return out, err
}

// PutSelection stores the next batch picked in round n (free-form bytes,
// e.g. JSON items with reasons), replacing any earlier one of that round.
func (s *Store) PutSelection(round int, data []byte, source string) error {
	return s.update(source, "selection.put", fmt.Sprintf("round %d, %d bytes", round, len(data)), func(tx *bolt.Tx) error {
		return tx.Bucket(bSelections).Put(u64(uint64(round)), append([]byte(nil), data...))
	})
}

// Selection returns the selection of round n, or ErrNotFound.
func (s *Store) Selection(round int) ([]byte, error) { return s.get(bSelections, u64(uint64(round))) }

// Selections returns every selection in round order.
func (s *Store) Selections() ([]Numbered, error) { return s.numbered(bSelections) }

// ---- machine labels ----

// PutMachineLabels writes machine labels (items must exist), replacing any
// earlier machine label of the same item, in one transaction.
func (s *Store) PutMachineLabels(ms []handoff.MachineLabel, source string) error {
	return s.update(source, "machine_labels.put", fmt.Sprintf("%d items", len(ms)), func(tx *bolt.Tx) error {
		b, ids := tx.Bucket(bMachineLabels), tx.Bucket(bItemIDs)
		for _, m := range ms {
			if ids.Get([]byte(m.Item)) == nil {
				return dataErr("item", "machine label for unknown item %q", m.Item)
			}
			if err := putJSON(b, []byte(m.Item), m); err != nil {
				return err
			}
		}
		return nil
	})
}

// MachineLabels calls fn for every machine label, ordered by item id.
func (s *Store) MachineLabels(fn func(m handoff.MachineLabel) error) error {
	return s.each(bMachineLabels, func(k, v []byte) error {
		var m handoff.MachineLabel
		if err := json.Unmarshal(v, &m); err != nil {
			return err
		}
		return fn(m)
	})
}

// MachineLabel returns one item's machine label, or ErrNotFound.
func (s *Store) MachineLabel(item string) (handoff.MachineLabel, error) {
	var m handoff.MachineLabel
	v, err := s.get(bMachineLabels, []byte(item))
	if err != nil {
		return m, err
	}
	err = json.Unmarshal(v, &m)
	return m, err
}

// ---- people, tokens, leases (for the HTTP API) ----

// PutPerson stores a person's record (free-form bytes, e.g. JSON with a
// password hash and role) under id, replacing any earlier one.
func (s *Store) PutPerson(id string, data []byte, source string) error {
	return s.update(source, "person.put", fmt.Sprintf("person %q", id), func(tx *bolt.Tx) error {
		return tx.Bucket(bPeople).Put([]byte(id), append([]byte(nil), data...))
	})
}

// Person returns a person's record, or ErrNotFound.
func (s *Store) Person(id string) ([]byte, error) { return s.get(bPeople, []byte(id)) }

// People calls fn for every person, ordered by id.
func (s *Store) People(fn func(id string, data []byte) error) error {
	return s.each(bPeople, func(k, v []byte) error { return fn(string(k), v) })
}

// PutToken stores an access token's record under key (store a hash of the
// token, never the token itself). The audit entry does not show the key.
func (s *Store) PutToken(key string, data []byte, source string) error {
	return s.update(source, "token.put", "token issued", func(tx *bolt.Tx) error {
		return tx.Bucket(bTokens).Put([]byte(key), append([]byte(nil), data...))
	})
}

// Token returns a token's record, or ErrNotFound.
func (s *Store) Token(key string) ([]byte, error) { return s.get(bTokens, []byte(key)) }

// Tokens calls fn for every token record, ordered by key.
func (s *Store) Tokens(fn func(key string, data []byte) error) error {
	return s.each(bTokens, func(k, v []byte) error { return fn(string(k), v) })
}

// DeleteTokens removes tokens (absent ones are ignored) in one transaction,
// with one audit entry that does not show the keys.
func (s *Store) DeleteTokens(keys []string, source string) error {
	defer s.tokensChanged()
	return s.update(source, "token.delete", fmt.Sprintf("%d token(s) revoked", len(keys)), func(tx *bolt.Tx) error {
		b := tx.Bucket(bTokens)
		for _, k := range keys {
			if err := b.Delete([]byte(k)); err != nil {
				return err
			}
		}
		return nil
	})
}

// DeleteToken removes a token (no error if absent).
func (s *Store) DeleteToken(key string, source string) error {
	defer s.tokensChanged()
	return s.update(source, "token.delete", "token revoked", func(tx *bolt.Tx) error {
		return tx.Bucket(bTokens).Delete([]byte(key))
	})
}

// tokenGens holds each open file's count of token deletions (shared by
// borrowed handles, like the group commit).
var tokenGens sync.Map // *bolt.DB → *atomic.Uint64

func (s *Store) tokenGen() *atomic.Uint64 {
	if g, ok := tokenGens.Load(s.db); ok {
		return g.(*atomic.Uint64)
	}
	g, _ := tokenGens.LoadOrStore(s.db, new(atomic.Uint64))
	return g.(*atomic.Uint64)
}

func (s *Store) tokensChanged() { s.tokenGen().Add(1) }

// TokenGeneration counts the token deletions made in this process through
// any handle on the file, so far. A caller that remembers tokens it has
// verified need only look in the store again when it has changed: this
// process holds the file, so nobody else can delete one.
func (s *Store) TokenGeneration() uint64 { return s.tokenGen().Load() }

// PutLease records that an item is handed out (free-form bytes, e.g. JSON
// with the annotator and expiry), replacing any earlier lease on it.
func (s *Store) PutLease(item string, data []byte, source string) error {
	return s.update(source, "lease.put", fmt.Sprintf("item %q", item), func(tx *bolt.Tx) error {
		return tx.Bucket(bLeases).Put([]byte(item), append([]byte(nil), data...))
	})
}

// Lease returns an item's lease, or ErrNotFound.
func (s *Store) Lease(item string) ([]byte, error) { return s.get(bLeases, []byte(item)) }

// DeleteLease removes an item's lease (no error if absent).
func (s *Store) DeleteLease(item string, source string) error {
	return s.update(source, "lease.delete", fmt.Sprintf("item %q", item), func(tx *bolt.Tx) error {
		return tx.Bucket(bLeases).Delete([]byte(item))
	})
}

// Leases calls fn for every lease, ordered by item id.
func (s *Store) Leases(fn func(item string, data []byte) error) error {
	return s.each(bLeases, func(k, v []byte) error { return fn(string(k), v) })
}

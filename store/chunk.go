package store

import (
	"encoding/binary"
	"encoding/json"
	"fmt"

	bolt "go.etcd.io/bbolt"
)

// defaultImportChunk is the number of records an import writes per
// transaction (see Store.ImportChunk).
const defaultImportChunk = 50_000

var (
	kPending = []byte("pending_import")
	bUndo    = []byte("undo_items") // item number → the item's record before this import replaced it
)

// pendingImport marks an import that has committed some chunks but not its
// last one. Everything it added has numbers at or above these marks, so it
// can be removed; items it replaced are in the undo bucket.
type pendingImport struct {
	Kind     string `json:"kind"`
	ItemSeq  uint64 `json:"item_seq"`
	LabelSeq uint64 `json:"label_seq"`
	AnnSeq   uint64 `json:"annotator_seq"`
}

func (s *Store) chunk() int {
	if s.ImportChunk > 0 {
		return s.ImportChunk
	}
	return defaultImportChunk
}

// write runs fn in one write transaction, holding the store's write lock
// shared, so that it never interleaves with a chunked import. Any other
// writer in this package (e.g. group commits with DB.Batch) must hold
// s.wmu.RLock around its transaction for the same reason.
func (s *Store) write(fn func(tx *bolt.Tx) error) error {
	s.wmu.RLock()
	defer s.wmu.RUnlock()
	return s.db.Update(fn)
}

// chunked runs step in successive write transactions until it reports done.
// Before the first commit it records a pending-import mark; the last
// transaction removes it. If a step fails after earlier chunks have been
// committed, those chunks are removed again (rollback), so the import lands
// whole or not at all. If the process dies half-way, Open finds the mark and
// rolls back.
//
// Readers in the same process may see a chunked import while it runs.
func (s *Store) chunked(kind string, step func(tx *bolt.Tx) (done bool, err error)) error {
	s.wmu.Lock()
	defer s.wmu.Unlock()
	committed := false
	for {
		var done bool
		err := s.db.Update(func(tx *bolt.Tx) error {
			m := tx.Bucket(bMeta)
			if !committed {
				p := pendingImport{Kind: kind,
					ItemSeq:  tx.Bucket(bItems).Sequence(),
					LabelSeq: tx.Bucket(bLabels).Sequence(),
					AnnSeq:   tx.Bucket(bAnnotators).Sequence()}
				if err := putJSON(m, kPending, p); err != nil {
					return err
				}
				if tx.Bucket(bUndo) != nil {
					if err := tx.DeleteBucket(bUndo); err != nil {
						return err
					}
				}
			}
			var err error
			done, err = step(tx)
			if err != nil {
				return err
			}
			if done {
				if err := m.Delete(kPending); err != nil {
					return err
				}
				if tx.Bucket(bUndo) != nil {
					return tx.DeleteBucket(bUndo)
				}
			}
			return nil
		})
		if err != nil {
			if committed {
				if rerr := s.rollback(); rerr != nil {
					return fmt.Errorf("%w; undoing the partial import failed too (%v): it will be undone when the project is next opened", err, rerr)
				}
			}
			return err
		}
		committed = true
		if done {
			return nil
		}
	}
}

// saveUndo keeps the record of an existing item (number n, below the
// import's first new number) before the import replaces it, once.
func saveUndo(tx *bolt.Tx, n []byte, old []byte) error {
	var p pendingImport
	if err := json.Unmarshal(tx.Bucket(bMeta).Get(kPending), &p); err != nil {
		return err
	}
	if binary.BigEndian.Uint64(n) >= p.ItemSeq {
		return nil // added by this import: rollback deletes it anyway
	}
	u, err := tx.CreateBucketIfNotExists(bUndo)
	if err != nil {
		return err
	}
	if u.Get(n) != nil {
		return nil
	}
	return u.Put(append([]byte(nil), n...), append([]byte(nil), old...))
}

// rollback removes what a pending import added and restores what it
// replaced, in chunks (each its own transaction, so a huge rollback stays
// within memory); it is safe to run again after a crash. It does nothing
// when no import is pending.
func (s *Store) rollback() error {
	for {
		more := false
		err := s.db.Update(func(tx *bolt.Tx) error {
			m := tx.Bucket(bMeta)
			pv := m.Get(kPending)
			if pv == nil {
				return nil
			}
			var p pendingImport
			if err := json.Unmarshal(pv, &p); err != nil {
				return fmt.Errorf("store: damaged pending-import mark: %w", err)
			}
			budget := s.chunk()
			// Labels first (they refer to items and annotators).
			lb := tx.Bucket(bLabels)
			keys := collectFrom(lb, p.LabelSeq, budget)
			var r LabelRecord
			for _, k := range keys {
				if err := decodeLabel(lb.Get(k), &r); err != nil {
					return err
				}
				seq := binary.BigEndian.Uint64(k)
				if err := tx.Bucket(bLabelItem).Delete(pair(uint64(r.Item), seq)); err != nil {
					return err
				}
				if err := tx.Bucket(bLabelAnn).Delete(pair(uint64(r.Annotator), seq)); err != nil {
					return err
				}
				if err := lb.Delete(k); err != nil {
					return err
				}
			}
			budget -= len(keys)
			if budget <= 0 {
				more = true
				return nil
			}
			ib := tx.Bucket(bItems)
			keys = collectFrom(ib, p.ItemSeq, budget)
			for _, k := range keys {
				it, err := decodeItem(ib.Get(k))
				if err != nil {
					return err
				}
				if err := tx.Bucket(bItemIDs).Delete([]byte(it.ID)); err != nil {
					return err
				}
				if err := ib.Delete(k); err != nil {
					return err
				}
			}
			budget -= len(keys)
			if budget <= 0 {
				more = true
				return nil
			}
			ab := tx.Bucket(bAnnotators)
			keys = collectFrom(ab, p.AnnSeq, budget)
			for _, k := range keys {
				var a struct{ ID string }
				if err := json.Unmarshal(ab.Get(k), &a); err != nil {
					return err
				}
				if err := tx.Bucket(bAnnotatorIDs).Delete([]byte(a.ID)); err != nil {
					return err
				}
				if err := ab.Delete(k); err != nil {
					return err
				}
			}
			if len(keys) == budget {
				more = true
				return nil
			}
			if u := tx.Bucket(bUndo); u != nil {
				if err := u.ForEach(func(k, v []byte) error {
					return ib.Put(append([]byte(nil), k...), append([]byte(nil), v...))
				}); err != nil {
					return err
				}
				if err := tx.DeleteBucket(bUndo); err != nil {
					return err
				}
			}
			for _, x := range []struct {
				b   []byte
				seq uint64
			}{{bLabels, p.LabelSeq}, {bItems, p.ItemSeq}, {bAnnotators, p.AnnSeq}} {
				if err := tx.Bucket(x.b).SetSequence(x.seq); err != nil {
					return err
				}
			}
			return m.Delete(kPending)
		})
		if err != nil || !more {
			return err
		}
	}
}

// collectFrom returns up to max keys of b at or above number from.
func collectFrom(b *bolt.Bucket, from uint64, max int) [][]byte {
	var keys [][]byte
	c := b.Cursor()
	for k, _ := c.Seek(u64(from)); k != nil && len(keys) < max; k, _ = c.Next() {
		keys = append(keys, append([]byte(nil), k...))
	}
	return keys
}

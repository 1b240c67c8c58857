package store

import (
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"strings"

	bolt "go.etcd.io/bbolt"

	"handoff"
)

// ImportResult says what an import changed.
type ImportResult struct {
	Added   int // new records
	Updated int // existing records replaced (items with update set; gold)
}

// String says in words what the import did: "45 added, 0 updated".
func (r ImportResult) String() string {
	return fmt.Sprintf("%d added, %d updated", r.Added, r.Updated)
}

// ImportItems writes the items that next yields until next returns io.EOF.
// Any other error from next, an item that breaks the handoff.Item rules, or
// an item id already in the project (or earlier in the same import) when
// update is false, stops the import and removes everything it wrote, so the
// project is as it was; data problems come back as *DataError. With update
// set, an item whose id exists replaces it and keeps its number.
//
// Items are written in transactions of ImportChunk records (see chunked), so
// memory stays bounded however large the import. next is called inside the
// write transaction; it must not use the store.
func (s *Store) ImportItems(source string, update bool, next func() (handoff.Item, error)) (ImportResult, error) {
	var res ImportResult
	chunk := s.chunk()
	err := s.chunked("items", func(tx *bolt.Tx) (bool, error) {
		items, ids := tx.Bucket(bItems), tx.Bucket(bItemIDs)
		items.FillPercent = 1 // keys are appended in order
		seq := items.Sequence()
		done := false
		for n := 0; n < chunk; n++ {
			it, err := next()
			if err == io.EOF {
				done = true
				break
			}
			if err != nil {
				return false, err
			}
			if err := it.Validate(); err != nil {
				return false, validationError(err)
			}
			val, err := encodeItem(&it)
			if err != nil {
				return false, err
			}
			id := []byte(it.ID)
			if old := ids.Get(id); old != nil {
				if !update {
					return false, dataErr("id", "duplicate item id %q (use --update to replace items)", it.ID)
				}
				k := append([]byte(nil), old...)
				if err := saveUndo(tx, k, items.Get(k)); err != nil {
					return false, err
				}
				if err := items.Put(k, val); err != nil {
					return false, err
				}
				res.Updated++
				continue
			}
			if err := items.Put(u64(seq), val); err != nil {
				return false, err
			}
			if err := ids.Put(id, u64(seq)); err != nil {
				return false, err
			}
			seq++
			res.Added++
		}
		if err := items.SetSequence(seq); err != nil {
			return false, err
		}
		if done {
			return true, s.audit(tx, source, "items.add", res.String())
		}
		return false, nil
	})
	if err != nil {
		return ImportResult{}, err
	}
	return res, nil
}

// PutItems writes items in one transaction; see ImportItems.
func (s *Store) PutItems(items []handoff.Item, update bool, source string) (ImportResult, error) {
	return s.ImportItems(source, update, sliceNext(items))
}

func sliceNext[T any](xs []T) func() (T, error) {
	i := 0
	return func() (T, error) {
		if i >= len(xs) {
			var zero T
			return zero, io.EOF
		}
		i++
		return xs[i-1], nil
	}
}

// Item encoding: one kind byte ('t' text, 'i' image, '?' other) then JSON.
func encodeItem(it *handoff.Item) ([]byte, error) {
	j, err := json.Marshal(it)
	if err != nil {
		return nil, err
	}
	v := make([]byte, 1+len(j))
	v[0] = kindByte(it.Kind)
	copy(v[1:], j)
	return v, nil
}

func kindByte(k handoff.Kind) byte {
	switch k {
	case handoff.KindText:
		return 't'
	case handoff.KindImage:
		return 'i'
	}
	return '?'
}

func decodeItem(v []byte) (handoff.Item, error) {
	var it handoff.Item
	if len(v) < 1 {
		return it, errors.New("store: empty item record")
	}
	err := json.Unmarshal(v[1:], &it)
	return it, err
}

// Item returns the item with the given id and its number, or ErrNotFound.
func (s *Store) Item(id string) (handoff.Item, int, error) {
	var it handoff.Item
	n := -1
	err := s.db.View(func(tx *bolt.Tx) error {
		k := tx.Bucket(bItemIDs).Get([]byte(id))
		if k == nil {
			return fmt.Errorf("item %q: %w", id, ErrNotFound)
		}
		n = int(binary.BigEndian.Uint64(k))
		var err error
		it, err = decodeItem(tx.Bucket(bItems).Get(k))
		return err
	})
	return it, n, err
}

// ItemCount returns the number of items.
func (s *Store) ItemCount() (int, error) {
	var n int
	err := s.db.View(func(tx *bolt.Tx) error {
		n = tx.Bucket(bItems).Stats().KeyN
		return nil
	})
	return n, err
}

// EachItem calls fn for every item in number order, inside one read
// transaction; an error from fn stops the walk and is returned.
func (s *Store) EachItem(fn func(n int, it handoff.Item) error) error {
	return s.db.View(func(tx *bolt.Tx) error {
		c := tx.Bucket(bItems).Cursor()
		for k, v := c.First(); k != nil; k, v = c.Next() {
			it, err := decodeItem(v)
			if err != nil {
				return err
			}
			if err := fn(int(binary.BigEndian.Uint64(k)), it); err != nil {
				return err
			}
		}
		return nil
	})
}

// ItemIDs returns the item ids indexed by item number.
func (s *Store) ItemIDs() ([]string, error) {
	var out []string
	err := s.db.View(func(tx *bolt.Tx) error {
		out = itemIDs(tx)
		return nil
	})
	return out, err
}

func itemIDs(tx *bolt.Tx) []string {
	out := make([]string, tx.Bucket(bItems).Sequence())
	c := tx.Bucket(bItemIDs).Cursor()
	for k, v := c.First(); k != nil; k, v = c.Next() {
		out[binary.BigEndian.Uint64(v)] = string(k)
	}
	return out
}

// validationError turns a handoff rule error ("text: empty text") into a
// DataError naming the field.
func validationError(err error) *DataError {
	msg := err.Error()
	if i := strings.Index(msg, ": "); i > 0 && !strings.Contains(msg[:i], " ") {
		return &DataError{Field: msg[:i], Err: errors.New(msg[i+2:])}
	}
	return &DataError{Err: err}
}

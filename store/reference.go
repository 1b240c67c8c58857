package store

import (
	"encoding/json"
	"errors"
	"fmt"
	"sort"
	"time"

	bolt "go.etcd.io/bbolt"

	"handoff"
)

// bReferences holds the reference codings: name → JSON handoff.Reference.
// It is created by the first PutReference, so files written before
// references existed open unchanged (Open does not require it).
var bReferences = []byte("references")

// ErrReferenceExists is returned (wrapped) by PutReference when a reference
// of that name exists and replace is false.
var ErrReferenceExists = errors.New("a reference of that name exists")

// PutReference stores an independent coding under its name, whole or not at
// all. It is checked against the codebook (handoff.Reference.Validate) and
// against the project: every item must be in the project and every parent
// must be the parent of at least one item; a broken rule is a
// *handoff.RowError naming the row and field. A reference of the same name
// is refused (ErrReferenceExists) unless replace is set.
//
// References are kept apart from gold and from everything a round reads
// (Snapshot does not include them): they never screen, clean, train or
// decide anything. A zero Added is set to now.
func (s *Store) PutReference(ref handoff.Reference, replace bool, source string) error {
	if err := ref.Validate(s.cb); err != nil {
		return err
	}
	if ref.Added.IsZero() {
		ref.Added = s.now().UTC().Truncate(time.Second)
	}
	return s.write(func(tx *bolt.Tx) error {
		b, err := tx.CreateBucketIfNotExists(bReferences)
		if err != nil {
			return err
		}
		old := b.Get([]byte(ref.Name)) != nil
		if old && !replace {
			return fmt.Errorf("reference %q: %w; give another --name, or --replace to replace it", ref.Name, ErrReferenceExists)
		}
		ids := tx.Bucket(bItemIDs)
		for i, l := range ref.Items {
			if ids.Get([]byte(l.Item)) == nil {
				return &handoff.RowError{Row: i, Field: "item", Err: fmt.Errorf("unknown item %q (add it with `loop items add` first)", l.Item)}
			}
		}
		if len(ref.Parents) > 0 {
			parents := map[string]bool{}
			if err := tx.Bucket(bItems).ForEach(func(_, v []byte) error {
				it, err := decodeItem(v)
				if err != nil {
					return err
				}
				if it.Parent != "" {
					parents[it.Parent] = true
				}
				return nil
			}); err != nil {
				return err
			}
			for i, p := range ref.Parents {
				if !parents[p.Parent] {
					return &handoff.RowError{Row: i, Field: "parent", Err: fmt.Errorf("no item has the parent %q (parents come from the items' parent field)", p.Parent)}
				}
			}
		}
		if err := putJSON(b, []byte(ref.Name), ref); err != nil {
			return err
		}
		verb := "added"
		if old {
			verb = "replaced"
		}
		return s.audit(tx, source, "reference.add", fmt.Sprintf("reference %q %s: %d %s rows from %s", ref.Name, verb, ref.Len(), ref.Kind(), ref.Source))
	})
}

// References returns every reference coding, sorted by name.
func (s *Store) References() ([]handoff.Reference, error) {
	var out []handoff.Reference
	err := s.db.View(func(tx *bolt.Tx) error {
		b := tx.Bucket(bReferences)
		if b == nil {
			return nil
		}
		return b.ForEach(func(k, v []byte) error {
			var r handoff.Reference
			if err := json.Unmarshal(v, &r); err != nil {
				return fmt.Errorf("reference %q is damaged: %w", k, err)
			}
			out = append(out, r)
			return nil
		})
	})
	sort.Slice(out, func(a, b int) bool { return out[a].Name < out[b].Name })
	return out, err
}

// Reference returns the reference coding of that name, or an error
// wrapping ErrNotFound.
func (s *Store) Reference(name string) (handoff.Reference, error) {
	var r handoff.Reference
	found := false
	err := s.db.View(func(tx *bolt.Tx) error {
		b := tx.Bucket(bReferences)
		if b == nil {
			return nil
		}
		v := b.Get([]byte(name))
		if v == nil {
			return nil
		}
		found = true
		return json.Unmarshal(v, &r)
	})
	if err != nil {
		return r, err
	}
	if !found {
		return r, fmt.Errorf("reference %q: %w (see `loop reference list DIR`)", name, ErrNotFound)
	}
	return r, nil
}

package store

// What the steps of the job store: the consensus with its report, models,
// round records and their next batches, and machine labels. Rounds write
// most of these together through CommitRound (snapshot.go).

import (
	"encoding/binary"
	"encoding/json"
	"fmt"

	bolt "go.etcd.io/bbolt"

	"handoff"
)

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

// MachineKey is the key of a machine label in the store: its item id for
// the first question (Question ""), so that records written before question
// trees read as the first question's; item id, a 0 byte and the question key
// for a follow-up. Keys sort by item id, each item's first question first.
func MachineKey(m handoff.MachineLabel) []byte {
	if m.Question == "" {
		return []byte(m.Item)
	}
	return []byte(m.Item + "\x00" + m.Question)
}

// MachineLabels calls fn for every machine label (every question's),
// ordered by item id.
func (s *Store) MachineLabels(fn func(m handoff.MachineLabel) error) error {
	return s.each(bMachineLabels, func(k, v []byte) error {
		var m handoff.MachineLabel
		if err := json.Unmarshal(v, &m); err != nil {
			return err
		}
		return fn(m)
	})
}

package store

import (
	"encoding/binary"
	"fmt"
	"sort"

	bolt "go.etcd.io/bbolt"

	"handoff"
)

// kWave is the meta key of the open wave (4 bytes, big-endian); absent
// means wave 1, as in files written before waves existed.
var kWave = []byte("wave")

// openWave returns the open wave inside tx.
func openWave(tx *bolt.Tx) uint16 {
	if v := tx.Bucket(bMeta).Get(kWave); len(v) == 4 {
		if w := binary.BigEndian.Uint32(v); w >= 1 && w <= handoff.MaxWave {
			return uint16(w)
		}
	}
	return 1
}

// waveOf is the wave a label is stored with: its own, or the open wave
// when it has none.
func waveOf(w int, open uint16) (uint16, error) {
	switch {
	case w == 0:
		return open, nil
	case w < 0 || w > handoff.MaxWave:
		return 0, dataErr("wave", "wave %d is outside 1–%d", w, handoff.MaxWave)
	}
	return uint16(w), nil
}

// Wave returns the project's open wave: the wave new labels without one
// get (1 until OpenWave is called).
func (s *Store) Wave() (int, error) {
	w := 1
	err := s.db.View(func(tx *bolt.Tx) error {
		w = int(openWave(tx))
		return nil
	})
	return w, err
}

// OpenWave opens the next crowd wave and returns its number: from now on,
// labels added without a wave (imports without --wave, labels sent through
// the service) belong to it. The wave after the highest one any label or
// the open wave has so far is opened, so a wave imported with `--wave N`
// is never reopened by accident.
func (s *Store) OpenWave(source string) (int, error) {
	var w uint16
	err := s.write(func(tx *bolt.Tx) error {
		hi := openWave(tx)
		var r LabelRecord
		if err := tx.Bucket(bLabels).ForEach(func(_, v []byte) error {
			if err := decodeLabel(v, &r); err != nil {
				return err
			}
			hi = max(hi, r.Wave)
			return nil
		}); err != nil {
			return err
		}
		if hi >= handoff.MaxWave {
			return fmt.Errorf("wave %d is the last wave a project can have", handoff.MaxWave)
		}
		w = hi + 1
		var v [4]byte
		binary.BigEndian.PutUint32(v[:], uint32(w))
		if err := tx.Bucket(bMeta).Put(kWave, v[:]); err != nil {
			return err
		}
		return s.audit(tx, source, "waves.open", fmt.Sprintf("wave %d opened", w))
	})
	return int(w), err
}

// WaveCount is one wave's share of the labels.
type WaveCount struct {
	Wave   int  `json:"wave"`
	Labels int  `json:"labels"`
	Items  int  `json:"items"` // items with at least one label of the wave
	Open   bool `json:"open"`  // the wave new labels get
}

// Waves returns every wave that has labels, and the open wave (even if it
// has none yet), in order.
func (s *Store) Waves() ([]WaveCount, error) {
	var out []WaveCount
	err := s.db.View(func(tx *bolt.Tx) error {
		open := openWave(tx)
		counts := map[uint16]int{}
		items := map[uint16]map[uint32]bool{}
		var r LabelRecord
		if err := tx.Bucket(bLabels).ForEach(func(_, v []byte) error {
			if err := decodeLabel(v, &r); err != nil {
				return err
			}
			counts[r.Wave]++
			if items[r.Wave] == nil {
				items[r.Wave] = map[uint32]bool{}
			}
			items[r.Wave][r.Item] = true
			return nil
		}); err != nil {
			return err
		}
		if _, ok := counts[open]; !ok {
			counts[open] = 0
		}
		for w, n := range counts {
			out = append(out, WaveCount{Wave: int(w), Labels: n, Items: len(items[w]), Open: w == open})
		}
		sort.Slice(out, func(a, b int) bool { return out[a].Wave < out[b].Wave })
		return nil
	})
	return out, err
}

// labelWaves returns the wave of every label in order of arrival (as the
// label table's columns), inside tx.
func labelWaves(tx *bolt.Tx) ([]uint16, error) {
	b := tx.Bucket(bLabels)
	out := make([]uint16, 0, b.Sequence())
	var r LabelRecord
	err := b.ForEach(func(_, v []byte) error {
		if err := decodeLabel(v, &r); err != nil {
			return err
		}
		out = append(out, r.Wave)
		return nil
	})
	return out, err
}

// doneInWave reports whether the service's record v of a person's label on
// an item (see doneRecord) is of a label in wave: a label of an earlier
// wave does not stop the person from labelling the item again. A damaged
// record counts as done, so that the caller reports it.
func doneInWave(tx *bolt.Tx, v []byte, wave uint16) bool {
	n, _, _, ok := doneRecord(v)
	if !ok {
		return true
	}
	var r LabelRecord
	if err := decodeLabel(tx.Bucket(bLabels).Get(u64(n)), &r); err != nil {
		return true
	}
	return r.Wave == wave
}

// kWaves marks a project that has (or had) labels of a wave after the
// first; absent in files written before waves existed, which have none.
var kWaves = []byte("waves_later")

// markWaves records, when later is set, that labels of a later wave exist.
func markWaves(tx *bolt.Tx, later bool) error {
	if !later || tx.Bucket(bMeta).Get(kWaves) != nil {
		return nil
	}
	return tx.Bucket(bMeta).Put(kWaves, []byte{1})
}

// HasWaves reports, without reading the labels, whether the project may
// have labels of more than one wave: a wave was opened, or labels of a wave
// after the first were imported.
func (s *Store) HasWaves() (bool, error) {
	has := false
	err := s.db.View(func(tx *bolt.Tx) error {
		has = openWave(tx) > 1 || tx.Bucket(bMeta).Get(kWaves) != nil
		return nil
	})
	return has, err
}

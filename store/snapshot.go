package store

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"strings"

	bolt "go.etcd.io/bbolt"

	"handoff"
)

// Snapshot is the project as one read transaction saw it: everything a round
// reads, consistent with itself (an item import or a label import that
// commits while a snapshot is taken is either wholly in it or not at all).
//
// Rules: Items are in item-number order (Items[n] is item number n);
// Labels refers to items by those numbers. Gold and Consensus are ordered by
// item id, Machine by item id. State holds every named state (PutState)
// by name. Round is the latest round record (nil before the first round),
// Selection the latest selection (nil if none), Model the bytes of the model
// named by SnapshotOptions.ModelOf (nil if none was named or it is missing).
type Snapshot struct {
	Codebook      handoff.Codebook
	Items         []handoff.Item
	Labels        *LabelTable
	LabelSeq      uint64 // labels ever committed (the label sequence): new labels raise it
	Gold          []handoff.Gold
	Machine       []handoff.MachineLabel
	Consensus     []handoff.Consensus
	ConsensusMeta []byte
	State         map[string][]byte
	Round         *Numbered
	Selection     *Numbered
	ModelName     string
	Model         []byte
}

// SnapshotOptions says what else a snapshot reads.
type SnapshotOptions struct {
	// Times fills the label table's Time and Seconds.
	Times bool
	// Waves fills the label table's Wave.
	Waves bool
	// ModelOf, if set, is called inside the transaction with the latest
	// round record (nil before the first round) and names the model to
	// read with it ("" for none).
	ModelOf func(round []byte) (string, error)
}

// Snapshot reads the project in one read transaction (see Snapshot). It
// waits for a chunked import that is running to finish first, so that it
// never sees part of one.
func (s *Store) Snapshot(opt SnapshotOptions) (*Snapshot, error) {
	s.wmu.RLock()
	defer s.wmu.RUnlock()
	sn := &Snapshot{Codebook: s.cb, State: map[string][]byte{}}
	err := s.db.View(func(tx *bolt.Tx) error {
		c := tx.Bucket(bItems).Cursor()
		for k, v := c.First(); k != nil; k, v = c.Next() {
			it, err := decodeItem(v)
			if err != nil {
				return err
			}
			if n := binary.BigEndian.Uint64(k); n != uint64(len(sn.Items)) {
				return fmt.Errorf("item number %d out of sequence (expected %d): the file is damaged", n, len(sn.Items))
			}
			sn.Items = append(sn.Items, it)
		}
		t, err := s.labelTable(tx, opt.Times)
		if err != nil {
			return err
		}
		if opt.Waves {
			if t.Wave, err = labelWaves(tx); err != nil {
				return err
			}
		}
		sn.Labels = t
		sn.LabelSeq = tx.Bucket(bLabels).Sequence()
		if err := tx.Bucket(bGold).ForEach(func(k, v []byte) error {
			var g handoff.Gold
			if err := json.Unmarshal(v, &g); err != nil {
				return err
			}
			sn.Gold = append(sn.Gold, g)
			return nil
		}); err != nil {
			return err
		}
		if err := tx.Bucket(bMachineLabels).ForEach(func(k, v []byte) error {
			var m handoff.MachineLabel
			if err := json.Unmarshal(v, &m); err != nil {
				return err
			}
			sn.Machine = append(sn.Machine, m)
			return nil
		}); err != nil {
			return err
		}
		if m := tx.Bucket(bMeta).Get(kConsensusMeta); m != nil {
			sn.ConsensusMeta = append([]byte(nil), m...)
		}
		if err := tx.Bucket(bConsensus).ForEach(func(k, v []byte) error {
			var c handoff.Consensus
			if err := json.Unmarshal(v, &c); err != nil {
				return err
			}
			sn.Consensus = append(sn.Consensus, c)
			return nil
		}); err != nil {
			return err
		}
		mc := tx.Bucket(bMeta).Cursor()
		prefix := []byte("state/")
		for k, v := mc.Seek(prefix); k != nil && strings.HasPrefix(string(k), "state/"); k, v = mc.Next() {
			sn.State[string(k[len(prefix):])] = append([]byte(nil), v...)
		}
		if k, v := tx.Bucket(bRounds).Cursor().Last(); k != nil {
			sn.Round = &Numbered{N: int(binary.BigEndian.Uint64(k)), Data: append([]byte(nil), v...)}
		}
		if k, v := tx.Bucket(bSelections).Cursor().Last(); k != nil {
			sn.Selection = &Numbered{N: int(binary.BigEndian.Uint64(k)), Data: append([]byte(nil), v...)}
		}
		if opt.ModelOf != nil {
			var rd []byte
			if sn.Round != nil {
				rd = sn.Round.Data
			}
			name, err := opt.ModelOf(rd)
			if err != nil {
				return err
			}
			if name != "" {
				sn.ModelName = name
				if v := tx.Bucket(bModels).Get([]byte(name)); v != nil {
					sn.Model = append([]byte(nil), v...)
				}
			}
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	return sn, nil
}

// RoundWrite is everything one round writes, committed by CommitRound in
// one write transaction.
type RoundWrite struct {
	// Round is the round's number and Record its record (free-form bytes).
	Round  int
	Record []byte
	// Consensus and ConsensusMeta replace the stored consensus (nil
	// Consensus with nil meta leaves it alone).
	Consensus     []handoff.Consensus
	ConsensusMeta []byte
	// ModelName and Model store a model and make it the latest ("" for
	// none).
	ModelName string
	Model     []byte
	// Selection is the round's next batch (nil for none).
	Selection []byte
	// State holds named states to replace (read back with State).
	State map[string][]byte
	// Machine are machine labels to write, each replacing any earlier
	// machine label of its item and question (items must exist).
	Machine []handoff.MachineLabel
	// Action names the change in the audit trail ("" means
	// "round.commit"); Detail says in words what was done.
	Action, Detail string
}

// CommitRound writes everything of one round in one write transaction and
// records it in the audit trail: the consensus, the model, the round record,
// its selection and the named states. Either all of it lands or none of it
// (a crash part-way leaves the previous round as it was).
func (s *Store) CommitRound(w RoundWrite, source string) error {
	detail := w.Detail
	if detail == "" {
		detail = fmt.Sprintf("round %d", w.Round)
	}
	action := w.Action
	if action == "" {
		action = "round.commit"
	}
	return s.update(source, action, detail, func(tx *bolt.Tx) error {
		if len(w.Machine) > 0 {
			b, ids := tx.Bucket(bMachineLabels), tx.Bucket(bItemIDs)
			for _, m := range w.Machine {
				if ids.Get([]byte(m.Item)) == nil {
					return dataErr("item", "machine label for unknown item %q", m.Item)
				}
				if err := putJSON(b, MachineKey(m), m); err != nil {
					return err
				}
			}
		}
		if w.Consensus != nil || w.ConsensusMeta != nil {
			if err := putConsensus(tx, w.Consensus, w.ConsensusMeta); err != nil {
				return err
			}
		}
		if w.ModelName != "" {
			if err := putModel(tx, w.ModelName, w.Model); err != nil {
				return err
			}
		}
		if w.Record != nil {
			if err := tx.Bucket(bRounds).Put(u64(uint64(w.Round)), append([]byte(nil), w.Record...)); err != nil {
				return err
			}
		}
		if w.Selection != nil {
			if err := tx.Bucket(bSelections).Put(u64(uint64(w.Round)), append([]byte(nil), w.Selection...)); err != nil {
				return err
			}
		}
		for name, data := range w.State {
			if name == "" {
				panic("store: CommitRound with an empty state name")
			}
			if err := tx.Bucket(bMeta).Put(stateKey(name), append([]byte(nil), data...)); err != nil {
				return err
			}
		}
		return nil
	})
}

// PutStates replaces several named states in one transaction (see
// PutState); action names the change in the audit trail ("settings.set",
// …) and detail says what changed.
func (s *Store) PutStates(states map[string][]byte, action, detail, source string) error {
	return s.update(source, action, detail, func(tx *bolt.Tx) error {
		for name, data := range states {
			if name == "" {
				panic("store: PutStates with an empty name")
			}
			if err := tx.Bucket(bMeta).Put(stateKey(name), append([]byte(nil), data...)); err != nil {
				return err
			}
		}
		return nil
	})
}

// UpdateState changes one named state in one write transaction: fn gets
// the stored bytes (nil if none) and returns the new bytes and, for the
// audit trail, what changed. An error from fn changes nothing.
func (s *Store) UpdateState(name, action, source string, fn func(old []byte) (data []byte, detail string, err error)) error {
	if name == "" {
		panic("store: UpdateState with an empty name")
	}
	return s.write(func(tx *bolt.Tx) error {
		m := tx.Bucket(bMeta)
		var old []byte
		if v := m.Get(stateKey(name)); v != nil {
			old = append([]byte(nil), v...)
		}
		data, detail, err := fn(old)
		if err != nil {
			return err
		}
		if err := m.Put(stateKey(name), append([]byte(nil), data...)); err != nil {
			return err
		}
		return s.audit(tx, source, action, detail)
	})
}

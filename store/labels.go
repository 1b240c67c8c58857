package store

import (
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"time"

	bolt "go.etcd.io/bbolt"

	"handoff"
)

// LabelRecord is one label in compact form: the item, annotator and class
// are numbers (item number, annotator number, index of the class in the
// codebook). Time is Unix nanoseconds, 0 if unknown; Seconds is 0 if unknown.
// Wave is the crowd wave (1, 2, …; 0 is written as 1 and read back as 1).
type LabelRecord struct {
	N         uint64 // label number, in order of arrival
	Item      uint32
	Annotator uint32
	Class     uint16
	Time      int64
	Seconds   float64
	Wave      uint16
}

// Packed label: uvarint item, uvarint annotator, uvarint class, varint time,
// then 8 bytes of float64 seconds only if seconds != 0, then the wave as a
// uvarint (1–3 bytes) only if it is 2 or more. A record of wave 1 is the
// same bytes as before waves existed, so older files read unchanged: after
// the time, 0 or 8 bytes are left without a wave, 1–3 or 9–11 with one.
func encodeLabel(r *LabelRecord) []byte {
	var buf [3*binary.MaxVarintLen32 + binary.MaxVarintLen64 + 8 + 3]byte
	n := binary.PutUvarint(buf[:], uint64(r.Item))
	n += binary.PutUvarint(buf[n:], uint64(r.Annotator))
	n += binary.PutUvarint(buf[n:], uint64(r.Class))
	n += binary.PutVarint(buf[n:], r.Time)
	if r.Seconds != 0 {
		binary.LittleEndian.PutUint64(buf[n:], math.Float64bits(r.Seconds))
		n += 8
	}
	if r.Wave > 1 {
		n += binary.PutUvarint(buf[n:], uint64(r.Wave))
	}
	return append([]byte(nil), buf[:n]...)
}

var errBadLabel = errors.New("store: damaged label record")

func decodeLabel(v []byte, r *LabelRecord) error {
	var k int
	x, n := binary.Uvarint(v)
	if n <= 0 {
		return errBadLabel
	}
	r.Item = uint32(x)
	k += n
	x, n = binary.Uvarint(v[k:])
	if n <= 0 {
		return errBadLabel
	}
	r.Annotator = uint32(x)
	k += n
	x, n = binary.Uvarint(v[k:])
	if n <= 0 {
		return errBadLabel
	}
	r.Class = uint16(x)
	k += n
	t, n := binary.Varint(v[k:])
	if n <= 0 {
		return errBadLabel
	}
	r.Time = t
	k += n
	r.Seconds, r.Wave = 0, 1
	rest := len(v) - k
	switch {
	case rest == 0:
	case rest == 8:
		r.Seconds = math.Float64frombits(binary.LittleEndian.Uint64(v[k:]))
	case rest >= 1 && rest <= 3, rest >= 9 && rest <= 11:
		if rest >= 9 {
			r.Seconds = math.Float64frombits(binary.LittleEndian.Uint64(v[k:]))
			k += 8
		}
		w, n := binary.Uvarint(v[k:])
		if n != len(v)-k || w < 2 || w > math.MaxUint16 {
			return errBadLabel
		}
		r.Wave = uint16(w)
	default:
		return errBadLabel
	}
	return nil
}

// ImportLabels writes the crowd labels that next yields, in one transaction,
// until next returns io.EOF. A label for an item not in the project, with a
// class not in the codebook, with an empty annotator, or with negative or
// non-finite seconds stops the import and rolls it back whole (*DataError).
// Annotators are created on first sight. Repeated labels (same item and
// annotator) are kept: cleaning rules decide later what to do with them.
// Times are stored to the nanosecond as UTC (read back in UTC); a time
// outside the years 1678–2261 is refused. A label without a wave (Wave 0)
// gets the project's open wave (see OpenWave); a wave above
// handoff.MaxWave or below 0 is refused.
//
// next is called inside the write transaction; it must not use the store.
func (s *Store) ImportLabels(source string, next func() (handoff.Label, error)) (ImportResult, error) {
	var res ImportResult
	chunk := s.chunk()
	annIDs := map[string]uint32{}
	err := s.chunked("labels", func(tx *bolt.Tx) (bool, error) {
		labels, byItem, byAnn := tx.Bucket(bLabels), tx.Bucket(bLabelItem), tx.Bucket(bLabelAnn)
		labels.FillPercent = 1
		itemIDs := tx.Bucket(bItemIDs)
		ann := newAnnotatorCache(tx, annIDs)
		open := openWave(tx)
		later := false
		seq := labels.Sequence()
		done := false
		for n := 0; n < chunk; n++ {
			l, err := next()
			if err == io.EOF {
				done = true
				break
			}
			if err != nil {
				return false, err
			}
			var r LabelRecord
			k := itemIDs.Get([]byte(l.Item))
			if k == nil {
				return false, dataErr("item", "unknown item %q (add it with `loop items add` first)", l.Item)
			}
			r.Item = uint32(binary.BigEndian.Uint64(k))
			c, err := s.classCode(l.Question, l.Class)
			if err != nil {
				return false, err
			}
			r.Class = c
			if l.Annotator == "" {
				return false, dataErr("annotator", "empty annotator id")
			}
			if math.IsNaN(l.Seconds) || math.IsInf(l.Seconds, 0) || l.Seconds < 0 {
				return false, dataErr("seconds", "seconds %v is not a finite number ≥ 0", l.Seconds)
			}
			r.Seconds = l.Seconds
			if r.Wave, err = waveOf(l.Wave, open); err != nil {
				return false, err
			}
			later = later || r.Wave > 1
			if !l.Time.IsZero() {
				if y := l.Time.UTC().Year(); y < 1678 || y > 2261 {
					return false, dataErr("time", "time %s is outside the years 1678–2261 that can be stored", l.Time.Format(time.RFC3339))
				}
				r.Time = l.Time.UnixNano()
			}
			a, err := ann.get(l.Annotator)
			if err != nil {
				return false, err
			}
			r.Annotator = a
			if err := labels.Put(u64(seq), encodeLabel(&r)); err != nil {
				return false, err
			}
			if err := byItem.Put(pair(uint64(r.Item), seq), nil); err != nil {
				return false, err
			}
			if err := byAnn.Put(pair(uint64(r.Annotator), seq), nil); err != nil {
				return false, err
			}
			seq++
			res.Added++
		}
		if err := labels.SetSequence(seq); err != nil {
			return false, err
		}
		if err := markWaves(tx, later); err != nil {
			return false, err
		}
		if done {
			return true, s.audit(tx, source, "labels.add", res.String())
		}
		return false, nil
	})
	if err != nil {
		return ImportResult{}, err
	}
	return res, nil
}

// PutLabels writes labels in one transaction; see ImportLabels.
func (s *Store) PutLabels(labels []handoff.Label, source string) (ImportResult, error) {
	return s.ImportLabels(source, sliceNext(labels))
}

type annotatorCache struct {
	tx      *bolt.Tx
	byID    map[string]uint32
	ids     *bolt.Bucket
	records *bolt.Bucket
}

// newAnnotatorCache looks annotators up in tx, remembering them in byID
// (which may be shared by the transactions of one import).
func newAnnotatorCache(tx *bolt.Tx, byID map[string]uint32) *annotatorCache {
	return &annotatorCache{tx: tx, byID: byID,
		ids: tx.Bucket(bAnnotatorIDs), records: tx.Bucket(bAnnotators)}
}

func (c *annotatorCache) get(id string) (uint32, error) {
	if n, ok := c.byID[id]; ok {
		return n, nil
	}
	if k := c.ids.Get([]byte(id)); k != nil {
		n := uint32(binary.BigEndian.Uint64(k))
		c.byID[id] = n
		return n, nil
	}
	seq := c.records.Sequence()
	if err := putJSON(c.records, u64(seq), handoff.Annotator{ID: id}); err != nil {
		return 0, err
	}
	if err := c.ids.Put([]byte(id), u64(seq)); err != nil {
		return 0, err
	}
	if err := c.records.SetSequence(seq + 1); err != nil {
		return 0, err
	}
	c.byID[id] = uint32(seq)
	return uint32(seq), nil
}

// PutAnnotators adds annotators or replaces their name and admin flag,
// keeping their numbers.
func (s *Store) PutAnnotators(as []handoff.Annotator, source string) (ImportResult, error) {
	var res ImportResult
	err := s.write(func(tx *bolt.Tx) error {
		res = ImportResult{}
		c := newAnnotatorCache(tx, map[string]uint32{})
		for _, a := range as {
			if a.ID == "" {
				return dataErr("id", "empty annotator id")
			}
			existed := c.ids.Get([]byte(a.ID)) != nil
			n, err := c.get(a.ID)
			if err != nil {
				return err
			}
			if err := putJSON(c.records, u64(uint64(n)), a); err != nil {
				return err
			}
			if existed {
				res.Updated++
			} else {
				res.Added++
			}
		}
		return s.audit(tx, source, "annotators.put", res.String())
	})
	return res, err
}

// Annotators returns all annotators indexed by annotator number.
func (s *Store) Annotators() ([]handoff.Annotator, error) {
	var out []handoff.Annotator
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bAnnotators).ForEach(func(k, v []byte) error {
			var a handoff.Annotator
			if err := json.Unmarshal(v, &a); err != nil {
				return err
			}
			out = append(out, a)
			return nil
		})
	})
	return out, err
}

// EachLabel calls fn for every label in order of arrival, inside one read
// transaction, reusing one LabelRecord (copy it to keep it). It allocates
// nothing per label. An error from fn stops the walk and is returned.
func (s *Store) EachLabel(fn func(r *LabelRecord) error) error {
	return s.db.View(func(tx *bolt.Tx) error {
		var r LabelRecord
		c := tx.Bucket(bLabels).Cursor()
		for k, v := c.First(); k != nil; k, v = c.Next() {
			r.N = binary.BigEndian.Uint64(k)
			if err := decodeLabel(v, &r); err != nil {
				return err
			}
			if err := fn(&r); err != nil {
				return err
			}
		}
		return nil
	})
}

// LabelTable is every label as parallel arrays (column i is label i, in
// order of arrival), with the names that the numbers stand for. Item[i]
// indexes ItemIDs, Annotator[i] indexes AnnotatorIDs, Class[i] indexes
// Classes (codebook order) in a one-question codebook; in a question tree
// it is the stored question<<8 | class (use Question, ClassIn, ForQuestion;
// Classes are the first question's). Time[i] is Unix nanoseconds (0 unknown) and
// Seconds[i] the seconds spent (0 unknown); both are nil unless asked for.
// Wave[i] is the label's crowd wave (1, 2, …), nil unless asked for
// (SnapshotOptions.Waves).
// Memory: 10 bytes per label (22 with times), so 40 million labels take
// 400 MB (880 MB), plus the id strings.
type LabelTable struct {
	ItemIDs      []string
	AnnotatorIDs []string
	Classes      []string

	Item      []uint32
	Annotator []uint32
	Class     []uint16
	Time      []int64
	Seconds   []float32
	Wave      []uint16

	tree bool // Class holds question<<8 | class (see Question, ClassIn)
	// all: the codebook's questions, for Names (nil unless tree).
	all []handoff.Question
}

// Len returns the number of labels.
func (t *LabelTable) Len() int { return len(t.Item) }

// LabelTable reads every label into a LabelTable in one read transaction,
// with Time and Seconds filled only if withTimes is set.
func (s *Store) LabelTable(withTimes bool) (*LabelTable, error) {
	var t *LabelTable
	err := s.db.View(func(tx *bolt.Tx) error {
		var err error
		t, err = s.labelTable(tx, withTimes)
		return err
	})
	if err != nil {
		return nil, err
	}
	return t, nil
}

// labelTable reads the label table inside tx.
func (s *Store) labelTable(tx *bolt.Tx, withTimes bool) (*LabelTable, error) {
	t := &LabelTable{Classes: s.cb.Keys(), tree: s.cb.Tree()}
	if t.tree {
		t.all = s.cb.All()
	}
	t.ItemIDs = itemIDs(tx)
	as := make([]string, tx.Bucket(bAnnotators).Sequence())
	if err := tx.Bucket(bAnnotatorIDs).ForEach(func(k, v []byte) error {
		as[binary.BigEndian.Uint64(v)] = string(k)
		return nil
	}); err != nil {
		return nil, err
	}
	t.AnnotatorIDs = as
	n := int(tx.Bucket(bLabels).Sequence())
	t.Item = make([]uint32, 0, n)
	t.Annotator = make([]uint32, 0, n)
	t.Class = make([]uint16, 0, n)
	if withTimes {
		t.Time = make([]int64, 0, n)
		t.Seconds = make([]float32, 0, n)
	}
	var r LabelRecord
	c := tx.Bucket(bLabels).Cursor()
	for k, v := c.First(); k != nil; k, v = c.Next() {
		if err := decodeLabel(v, &r); err != nil {
			return nil, err
		}
		t.Item = append(t.Item, r.Item)
		t.Annotator = append(t.Annotator, r.Annotator)
		t.Class = append(t.Class, r.Class)
		if withTimes {
			t.Time = append(t.Time, r.Time)
			t.Seconds = append(t.Seconds, float32(r.Seconds))
		}
	}
	return t, nil
}

func (s *Store) toLabel(tx *bolt.Tx, r *LabelRecord, items, anns map[uint32]string) (handoff.Label, error) {
	id, ok := items[r.Item]
	if !ok {
		v := tx.Bucket(bItems).Get(u64(uint64(r.Item)))
		it, err := decodeItem(v)
		if err != nil {
			return handoff.Label{}, err
		}
		id = it.ID
		items[r.Item] = id
	}
	an, ok := anns[r.Annotator]
	if !ok {
		var a handoff.Annotator
		if err := json.Unmarshal(tx.Bucket(bAnnotators).Get(u64(uint64(r.Annotator))), &a); err != nil {
			return handoff.Label{}, err
		}
		an = a.ID
		anns[r.Annotator] = an
	}
	q, class, err := s.classOf(r.Class)
	if err != nil {
		return handoff.Label{}, err
	}
	l := handoff.Label{Item: id, Annotator: an, Question: q, Class: class, Seconds: r.Seconds}
	if r.Wave > 1 {
		l.Wave = int(r.Wave)
	}
	if r.Time != 0 {
		l.Time = time.Unix(0, r.Time).UTC()
	}
	return l, nil
}

// labelsByPrefix returns the labels listed in index bucket idx under number n.
func (s *Store) labelsByPrefix(idx []byte, n uint64) ([]handoff.Label, error) {
	var out []handoff.Label
	err := s.db.View(func(tx *bolt.Tx) error {
		items, anns := map[uint32]string{}, map[uint32]string{}
		labels := tx.Bucket(bLabels)
		prefix := u64(n)
		c := tx.Bucket(idx).Cursor()
		var r LabelRecord
		for k, _ := c.Seek(prefix); k != nil && string(k[:8]) == string(prefix); k, _ = c.Next() {
			if err := decodeLabel(labels.Get(k[8:]), &r); err != nil {
				return err
			}
			l, err := s.toLabel(tx, &r, items, anns)
			if err != nil {
				return err
			}
			out = append(out, l)
		}
		return nil
	})
	return out, err
}

// LabelsFor returns the labels of one item in order of arrival.
func (s *Store) LabelsFor(item string) ([]handoff.Label, error) {
	_, n, err := s.Item(item)
	if err != nil {
		return nil, err
	}
	return s.labelsByPrefix(bLabelItem, uint64(n))
}

// LabelsBy returns the labels of one annotator in order of arrival.
func (s *Store) LabelsBy(annotator string) ([]handoff.Label, error) {
	var n uint64
	err := s.db.View(func(tx *bolt.Tx) error {
		k := tx.Bucket(bAnnotatorIDs).Get([]byte(annotator))
		if k == nil {
			return fmt.Errorf("annotator %q: %w", annotator, ErrNotFound)
		}
		n = binary.BigEndian.Uint64(k)
		return nil
	})
	if err != nil {
		return nil, err
	}
	return s.labelsByPrefix(bLabelAnn, n)
}

// Labels returns every label with its ids spelled out, in order of arrival.
// For large projects prefer LabelTable or EachLabel.
func (s *Store) Labels() ([]handoff.Label, error) {
	var out []handoff.Label
	err := s.db.View(func(tx *bolt.Tx) error {
		items, anns := map[uint32]string{}, map[uint32]string{}
		var r LabelRecord
		return tx.Bucket(bLabels).ForEach(func(k, v []byte) error {
			if err := decodeLabel(v, &r); err != nil {
				return err
			}
			l, err := s.toLabel(tx, &r, items, anns)
			if err != nil {
				return err
			}
			out = append(out, l)
			return nil
		})
	})
	return out, err
}

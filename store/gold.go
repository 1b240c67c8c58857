package store

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"io"
	"sort"

	bolt "go.etcd.io/bbolt"

	"handoff"
)

// ImportGold writes the gold answers that next yields, in one transaction,
// until next returns io.EOF. Gold for an item not in the project or with a
// class not in the codebook rolls the import back whole (*DataError); so
// does the same item twice in one import. Gold for an item that already has
// gold replaces it (counted as Updated).
func (s *Store) ImportGold(source string, next func() (handoff.Gold, error)) (ImportResult, error) {
	var res ImportResult
	err := s.write(func(tx *bolt.Tx) error {
		res = ImportResult{}
		gold, ids := tx.Bucket(bGold), tx.Bucket(bItemIDs)
		seen := map[string]bool{}
		for {
			g, err := next()
			if err == io.EOF {
				break
			}
			if err != nil {
				return err
			}
			if ids.Get([]byte(g.Item)) == nil {
				return dataErr("item", "unknown item %q (add it with `loop items add` first)", g.Item)
			}
			if _, ok := s.cbIx[g.Class]; !ok {
				return dataErr("label", "label %q is not in the codebook (classes: %v)", g.Class, s.cb.Keys())
			}
			if seen[g.Item] {
				return dataErr("item", "gold for item %q given twice", g.Item)
			}
			seen[g.Item] = true
			if gold.Get([]byte(g.Item)) != nil {
				res.Updated++
			} else {
				res.Added++
			}
			if err := putJSON(gold, []byte(g.Item), g); err != nil {
				return err
			}
		}
		return s.audit(tx, source, "gold.add", res.String())
	})
	if err != nil {
		return ImportResult{}, err
	}
	return res, nil
}

// PutGold writes gold answers in one transaction; see ImportGold.
func (s *Store) PutGold(gold []handoff.Gold, source string) (ImportResult, error) {
	return s.ImportGold(source, sliceNext(gold))
}

// Gold returns every gold answer, ordered by item id.
func (s *Store) Gold() ([]handoff.Gold, error) {
	var out []handoff.Gold
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bGold).ForEach(func(k, v []byte) error {
			var g handoff.Gold
			if err := json.Unmarshal(v, &g); err != nil {
				return err
			}
			out = append(out, g)
			return nil
		})
	})
	return out, err
}

// Stats is a summary of a project. Every field is computed from the file, so
// two calls on an unchanged project give equal values.
type Stats struct {
	Codebook      string         `json:"codebook"`
	Classes       []string       `json:"classes"`
	Items         int            `json:"items"`
	ItemsByKind   map[string]int `json:"items_by_kind"`
	Parents       int            `json:"parents"`
	LabelledItems int            `json:"labelled_items"`
	Labels        int            `json:"labels"`
	LabelsByClass map[string]int `json:"labels_by_class"`
	Annotators    int            `json:"annotators"`
	Gold          int            `json:"gold"`
	// LabelsPerItem is the distribution of the number of labels per item:
	// entry {Labels: k, Items: n} says n items have exactly k labels.
	// Items with no labels are included (k = 0). Ordered by Labels.
	LabelsPerItem []LabelsPerItem `json:"labels_per_item"`
	AuditEntries  int             `json:"audit_entries"`
}

// LabelsPerItem is one bar of the labels-per-item distribution.
type LabelsPerItem struct {
	Labels int `json:"labels"`
	Items  int `json:"items"`
}

// Stats scans the project and summarises it.
func (s *Store) Stats() (Stats, error) {
	st := Stats{
		Codebook:      s.cb.Name,
		Classes:       s.cb.Keys(),
		ItemsByKind:   map[string]int{},
		LabelsByClass: map[string]int{},
	}
	for _, k := range st.Classes {
		st.LabelsByClass[k] = 0
	}
	err := s.db.View(func(tx *bolt.Tx) error {
		parents := map[string]struct{}{}
		c := tx.Bucket(bItems).Cursor()
		for k, v := c.First(); k != nil; k, v = c.Next() {
			st.Items++
			switch v[0] {
			case 't':
				st.ItemsByKind[string(handoff.KindText)]++
			case 'i':
				st.ItemsByKind[string(handoff.KindImage)]++
			default:
				st.ItemsByKind["other"]++
			}
			if p := parentOf(v[1:]); p != "" {
				parents[p] = struct{}{}
			}
		}
		st.Parents = len(parents)
		var r LabelRecord
		c = tx.Bucket(bLabels).Cursor()
		for k, v := c.First(); k != nil; k, v = c.Next() {
			if err := decodeLabel(v, &r); err != nil {
				return err
			}
			st.Labels++
			if int(r.Class) < len(st.Classes) {
				st.LabelsByClass[st.Classes[r.Class]]++
			}
		}
		// Runs of equal item numbers in the by-item index.
		perItem := map[int]int{}
		c = tx.Bucket(bLabelItem).Cursor()
		var cur uint64
		run := 0
		for k, _ := c.First(); k != nil; k, _ = c.Next() {
			it := binary.BigEndian.Uint64(k)
			if run > 0 && it != cur {
				perItem[run]++
				st.LabelledItems++
				run = 0
			}
			cur = it
			run++
		}
		if run > 0 {
			perItem[run]++
			st.LabelledItems++
		}
		if n := st.Items - st.LabelledItems; n > 0 {
			perItem[0] = n
		}
		st.LabelsPerItem = make([]LabelsPerItem, 0, len(perItem))
		for k, n := range perItem {
			st.LabelsPerItem = append(st.LabelsPerItem, LabelsPerItem{Labels: k, Items: n})
		}
		sort.Slice(st.LabelsPerItem, func(i, j int) bool { return st.LabelsPerItem[i].Labels < st.LabelsPerItem[j].Labels })
		st.Annotators = tx.Bucket(bAnnotatorIDs).Stats().KeyN
		st.Gold = tx.Bucket(bGold).Stats().KeyN
		st.AuditEntries = int(tx.Bucket(bAudit).Sequence())
		return nil
	})
	return st, err
}

// parentOf pulls the parent field out of an item's JSON without decoding the
// rest; it returns "" if there is none.
func parentOf(j []byte) string {
	var p struct {
		Parent string `json:"parent"`
	}
	if !bytes.Contains(j, []byte(`"parent":`)) {
		return ""
	}
	if err := json.Unmarshal(j, &p); err != nil {
		return ""
	}
	return p.Parent
}

// String gives a short human-readable form of the stats.
func (st Stats) String() string {
	s := fmt.Sprintf("codebook: %s (%d classes)\n", st.Codebook, len(st.Classes))
	s += fmt.Sprintf("items: %d (text %d, image %d), parents %d\n", st.Items,
		st.ItemsByKind[string(handoff.KindText)], st.ItemsByKind[string(handoff.KindImage)], st.Parents)
	s += fmt.Sprintf("labels: %d on %d items by %d annotators\n", st.Labels, st.LabelledItems, st.Annotators)
	s += fmt.Sprintf("gold: %d\n", st.Gold)
	s += "labels per item:"
	for i, b := range st.LabelsPerItem {
		if i > 0 {
			s += ","
		}
		s += fmt.Sprintf(" %d item(s) with %d", b.Items, b.Labels)
	}
	s += "\nlabels by class:"
	for _, k := range st.Classes {
		s += fmt.Sprintf(" %s=%d", k, st.LabelsByClass[k])
	}
	return s + "\n"
}

package round

import (
	"handoff/store"
)

// Pending is what the next round would find new since the last one.
//
// Rules: Fresh is true when a round would run — before the first round, or
// when labels were committed or the number of gold answers changed since
// the last round — and false when RunWith would return ErrNoNewLabels
// (without RunOptions.Force). NewLabels counts the labels committed since
// the last round (every label before the first); a label changed in place
// (store.ChangeLabel) is not a new one.
type Pending struct {
	Round       int  `json:"round"`        // rounds run so far
	Labels      int  `json:"labels"`       // labels in the project
	NewLabels   int  `json:"new_labels"`   // labels committed since the last round
	Gold        int  `json:"gold"`         // gold answers on the project's items
	GoldChanged bool `json:"gold_changed"` // the number of gold answers differs from the last round's
	Fresh       bool `json:"fresh"`
}

// PendingWork says what the next round would find new, from one snapshot
// of the store, by the same test a round applies before it runs.
func PendingWork(st *store.Store) (Pending, error) {
	sn, err := st.Snapshot(store.SnapshotOptions{})
	if err != nil {
		return Pending{}, err
	}
	in, err := inputOf(sn)
	if err != nil {
		return Pending{}, err
	}
	s := in.s
	goldN := 0
	for _, g := range in.p.gold {
		if g >= 0 {
			goldN++
		}
	}
	p := Pending{Round: s.Round, Labels: in.p.labels.Len(), Gold: goldN, GoldChanged: s.Round > 0 && goldN != s.Gold}
	if in.labelSeq > s.LabelSeq {
		p.NewLabels = int(in.labelSeq - s.LabelSeq)
	}
	if s.Round == 0 {
		p.NewLabels = p.Labels
	}
	p.Fresh = s.Round == 0 || in.labelSeq != s.LabelSeq || goldN != s.Gold
	return p, nil
}

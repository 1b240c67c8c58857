package crowd

import (
	"strings"
	"testing"
	"time"

	"handoff"
)

// lab is a test shorthand for one label.
type lab struct {
	item, ann, class int
	sec              float32
	t                int64
}

func mkLabels(nItems, nAnn, k int, ls []lab) *Labels {
	l := &Labels{NItems: nItems, NAnnotators: nAnn, NClasses: k}
	var anyT, anyS bool
	for _, x := range ls {
		anyT = anyT || x.t != 0
		anyS = anyS || x.sec != 0
	}
	for _, x := range ls {
		l.Item = append(l.Item, int32(x.item))
		l.Annotator = append(l.Annotator, int32(x.ann))
		l.Class = append(l.Class, uint8(x.class))
		if anyS {
			l.Seconds = append(l.Seconds, x.sec)
		}
		if anyT {
			l.Time = append(l.Time, x.t)
		}
	}
	return l
}

func only(r Rules) Rules {
	d := DefaultRules()
	d.FirstOnly, d.RepeatOffenders, d.GoldScreen, d.TooFast, d.StraightLining = r.FirstOnly, r.RepeatOffenders, r.GoldScreen, r.TooFast, r.StraightLining
	return d
}

func summary(c *Cleaning, rule string) RuleSummary {
	for _, s := range c.Summary {
		if s.Rule == rule {
			return s
		}
	}
	return RuleSummary{}
}

func TestCleanFirstOnly(t *testing.T) {
	// Annotator 0 labels item 0 three times; with times, the earliest wins
	// even though it comes last in input order. Annotator 1 labels item 1
	// twice without times: the first in input order wins.
	l := mkLabels(2, 2, 3, []lab{
		{0, 0, 1, 0, 300}, {0, 0, 2, 0, 200}, {0, 0, 0, 0, 100},
		{1, 1, 2, 0, 0}, {1, 1, 0, 0, 0}, {0, 1, 1, 0, 0},
	})
	out, cl, err := Clean(l, nil, only(Rules{FirstOnly: true}))
	if err != nil {
		t.Fatal(err)
	}
	want := []bool{false, false, true, true, false, true}
	for j, k := range want {
		if cl.Keep[j] != k {
			t.Errorf("label %d kept = %v, want %v", j, cl.Keep[j], k)
		}
	}
	if out.Len() != 3 || cl.Out != 3 || cl.In != 6 || summary(cl, RuleFirstOnly).Labels != 3 {
		t.Errorf("kept %d (%d of %d), summary %+v", out.Len(), cl.Out, cl.In, cl.Summary)
	}
	for _, d := range cl.Drops {
		if d.Rule != RuleFirstOnly || d.Label < 0 || d.Reason == "" {
			t.Errorf("drop %+v", d)
		}
	}
	if out.Class[0] != 0 || out.Time[0] != 100 {
		t.Errorf("kept label %d (time %d), want class 0 at time 100", out.Class[0], out.Time[0])
	}
	// Switched off: everything kept.
	_, cl, _ = Clean(l, nil, Rules{})
	if cl.Out != 6 || len(cl.Drops) != 0 {
		t.Errorf("no rules: kept %d, drops %d", cl.Out, len(cl.Drops))
	}
}

func TestCleanRepeatOffenders(t *testing.T) {
	// Annotator 0 labels items 0, 1, 2 six times each (> R = 5 on > M = 2
	// items): every label dropped. Annotator 1 does it on only 2 items: kept.
	var ls []lab
	for i := 0; i < 3; i++ {
		for range 6 {
			ls = append(ls, lab{item: i, ann: 0})
		}
	}
	for i := 0; i < 2; i++ {
		for range 6 {
			ls = append(ls, lab{item: i, ann: 1, class: 1})
		}
	}
	ls = append(ls, lab{item: 3, ann: 0})
	l := mkLabels(4, 2, 2, ls)
	_, cl, err := Clean(l, nil, only(Rules{RepeatOffenders: true}))
	if err != nil {
		t.Fatal(err)
	}
	s := summary(cl, RuleRepeatOffender)
	if s.Annotators != 1 || s.Labels != 19 || cl.Out != 12 {
		t.Errorf("summary %+v, out %d", s, cl.Out)
	}
	if len(cl.Drops) != 1 || cl.Drops[0].Annotator != 0 || cl.Drops[0].Label != -1 || !strings.Contains(cl.Drops[0].Reason, "3 items") {
		t.Errorf("drops %+v", cl.Drops)
	}
}

func TestCleanGoldScreen(t *testing.T) {
	// 6 gold items of class 1. Annotator 0: 2/6 right → dropped.
	// Annotator 1: 6/6. Annotator 2: 0/4 but below the 5-item minimum → kept.
	gold := []int{1, 1, 1, 1, 1, 1, -1}
	var ls []lab
	for i := 0; i < 6; i++ {
		c := 0
		if i < 2 {
			c = 1
		}
		ls = append(ls, lab{item: i, ann: 0, class: c}, lab{item: i, ann: 1, class: 1})
		if i < 4 {
			ls = append(ls, lab{item: i, ann: 2, class: 0})
		}
	}
	ls = append(ls, lab{item: 6, ann: 0}, lab{item: 6, ann: 2})
	l := mkLabels(7, 3, 2, ls)
	out, cl, err := Clean(l, gold, only(Rules{GoldScreen: true}))
	if err != nil {
		t.Fatal(err)
	}
	s := summary(cl, RuleGoldScreen)
	if s.Annotators != 1 || s.Labels != 7 || len(cl.Drops) != 1 || cl.Drops[0].Annotator != 0 {
		t.Errorf("summary %+v drops %+v", s, cl.Drops)
	}
	for _, a := range out.Annotator {
		if a == 0 {
			t.Error("annotator 0 still has labels")
		}
	}
	if !strings.Contains(cl.Drops[0].Reason, "2/6") {
		t.Errorf("reason %q should give 2/6", cl.Drops[0].Reason)
	}
	// Without gold: a note, nothing dropped.
	_, cl, _ = Clean(l, nil, only(Rules{GoldScreen: true}))
	if s := summary(cl, RuleGoldScreen); s.Labels != 0 || s.Note == "" {
		t.Errorf("no gold: %+v", s)
	}
}

func TestCleanTooFast(t *testing.T) {
	l := mkLabels(1, 3, 2, []lab{{0, 0, 0, 0.5, 0}, {0, 1, 0, 3, 0}, {0, 2, 1, 0, 0}})
	r := only(Rules{TooFast: true})
	r.MinSeconds = 1
	_, cl, err := Clean(l, nil, r)
	if err != nil {
		t.Fatal(err)
	}
	// Label 0 (0.5 s) dropped; label 2 has unknown time (0) and stays.
	if cl.Keep[0] || !cl.Keep[1] || !cl.Keep[2] || len(cl.Drops) != 1 || cl.Drops[0].Label != 0 {
		t.Errorf("keep %v drops %+v", cl.Keep, cl.Drops)
	}
	r.MinSeconds = 0
	if _, _, err := Clean(l, nil, r); err == nil {
		t.Error("too-fast with MinSeconds 0: want an error")
	}
}

func TestCleanStraightLining(t *testing.T) {
	// Annotator 0 answers class 0 on all 30 items; annotators 1 and 2 agree
	// with the truth, which alternates 0, 1, 2: mixed → flagged. Annotator 3
	// answers 0 on 25 items whose consensus is 0 too: not flagged.
	var ls []lab
	for i := 0; i < 30; i++ {
		ls = append(ls, lab{item: i, ann: 0}, lab{item: i, ann: 1, class: i % 3}, lab{item: i, ann: 2, class: i % 3})
	}
	for i := 30; i < 55; i++ {
		ls = append(ls, lab{item: i, ann: 3}, lab{item: i, ann: 1}, lab{item: i, ann: 2})
	}
	l := mkLabels(55, 4, 3, ls)
	_, cl, err := Clean(l, nil, only(Rules{StraightLining: true}))
	if err != nil {
		t.Fatal(err)
	}
	if len(cl.Flags) != 1 || cl.Flags[0].Annotator != 0 || cl.Out != l.Len() {
		t.Errorf("flags %+v, kept %d of %d", cl.Flags, cl.Out, l.Len())
	}
}

func TestCleanDefaultsOnDS1979(t *testing.T) {
	// With the defaults, observer1's repeats are cut to the first of three.
	l, _ := loadDS1979(t)
	out, cl, err := Clean(l, nil, DefaultRules())
	if err != nil {
		t.Fatal(err)
	}
	if out.Len() != 45*5 || summary(cl, RuleFirstOnly).Labels != 90 {
		t.Errorf("kept %d labels, first-only dropped %d; want 225 and 90", out.Len(), summary(cl, RuleFirstOnly).Labels)
	}
}

func TestBuildAndIndex(t *testing.T) {
	cb := &handoff.Codebook{Question: "q", Classes: []handoff.Class{{Key: "a"}, {Key: "b"}}}
	t0 := time.Date(2024, 1, 2, 3, 4, 5, 0, time.UTC)
	labels := []handoff.Label{
		{Item: "x", Annotator: "ann1", Class: "b", Time: t0, Seconds: 2.5},
		{Item: "y", Annotator: "ann2", Class: "a"},
		{Item: "x", Annotator: "ann2", Class: "b"},
	}
	l, ix, err := Build(labels, cb, []string{"x", "y", "z"})
	if err != nil {
		t.Fatal(err)
	}
	if l.NItems != 3 || l.NAnnotators != 2 || l.NClasses != 2 || l.Time[0] != t0.UnixNano() || l.Seconds[0] != 2.5 {
		t.Fatalf("labels %+v", l)
	}
	if i, ok := ix.Item("z"); !ok || i != 2 {
		t.Errorf("Item(z) = %d, %v", i, ok)
	}
	if a, ok := ix.Annotator("ann2"); !ok || a != 1 {
		t.Errorf("Annotator(ann2) = %d, %v", a, ok)
	}
	gold, err := ix.Gold([]handoff.Gold{{Item: "y", Class: "b"}})
	if err != nil || gold[1] != 1 || gold[0] != -1 {
		t.Errorf("gold %v, %v", gold, err)
	}
	r, err := Majority(l, Options{Gold: gold})
	if err != nil {
		t.Fatal(err)
	}
	cs := ix.Consensus(r)
	if cs[0].Class != "b" || cs[0].Labels != 2 || cs[1].Method != "gold" || cs[1].Class != "b" || cs[2].Labels != 0 {
		t.Errorf("consensus %+v", cs)
	}
	for _, bad := range []struct {
		labels []handoff.Label
		items  []string
		want   string
	}{
		{[]handoff.Label{{Item: "q", Annotator: "a", Class: "a"}}, []string{"x"}, "unknown item"},
		{[]handoff.Label{{Item: "x", Annotator: "a", Class: "c"}}, nil, "not in the codebook"},
		{[]handoff.Label{{Item: "x", Annotator: "", Class: "a"}}, nil, "empty annotator"},
		{[]handoff.Label{{Item: "x", Annotator: "a", Class: "a", Seconds: -1}}, nil, "seconds"},
		{nil, []string{"x", "x"}, "listed twice"},
	} {
		if _, _, err := Build(bad.labels, cb, bad.items); err == nil || !strings.Contains(err.Error(), bad.want) {
			t.Errorf("Build(%v): error %v, want %q", bad.labels, err, bad.want)
		}
	}
	if _, err := ix.Gold([]handoff.Gold{{Item: "x", Class: "a"}, {Item: "x", Class: "b"}}); err == nil {
		t.Error("conflicting gold: want an error")
	}
}

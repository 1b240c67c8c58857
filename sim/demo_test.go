package sim

import (
	"reflect"
	"strings"
	"testing"

	"handoff"
)

func TestDemoDefault(t *testing.T) {
	d, err := NewDemo(DemoConfig{Dir: t.TempDir()}, 1)
	if err != nil {
		t.Fatal(err)
	}
	// The foundation issue asks for at least 2,000 items (text and image),
	// 10,000 labels and 30 annotators.
	kinds := map[handoff.Kind]int{}
	seen := map[string]bool{}
	for _, it := range d.Items {
		if err := it.Validate(); err != nil {
			t.Fatalf("%s: %v", it.ID, err)
		}
		if seen[it.ID] {
			t.Fatalf("duplicate item %s", it.ID)
		}
		seen[it.ID] = true
		kinds[it.Kind]++
		if d.Truth[it.ID] == "" {
			t.Fatalf("%s: no truth", it.ID)
		}
	}
	people := map[string]bool{}
	topic, particle := TopicCodebook(), ParticleCodebook()
	labelled := map[string]bool{}
	repeats := map[[2]string]int{}
	for _, l := range d.Labels {
		cb := &topic
		if strings.HasPrefix(l.Item, "img-") {
			cb = &particle
		}
		if !seen[l.Item] {
			t.Fatalf("label for unknown item %s", l.Item)
		}
		if _, ok := cb.Index(l.Class); !ok {
			t.Fatalf("label %+v: class not in the %s codebook", l, cb.Name)
		}
		if _, ok := d.Codebook.Index(l.Class); !ok {
			t.Fatalf("label %+v: class not in the combined codebook", l)
		}
		if _, ok := d.Types[l.Annotator]; !ok {
			t.Fatalf("label by unknown annotator %s", l.Annotator)
		}
		people[l.Annotator] = true
		labelled[l.Item] = true
		repeats[[2]string{l.Annotator, l.Item}]++
	}
	if len(d.Items) < 2000 || kinds[handoff.KindText] < 1500 || kinds[handoff.KindImage] < 500 || len(d.Labels) < 10000 || len(people) < 30 {
		t.Fatalf("demo has %d items (%v), %d labels, %d annotators; want ≥ 2,000 (≥ 1,500 text, ≥ 500 images), ≥ 10,000, ≥ 30",
			len(d.Items), kinds, len(d.Labels), len(people))
	}
	if n := len(d.Items) - len(labelled); n < 500 {
		t.Errorf("only %d unlabelled items left for the machine", n)
	}
	for _, g := range d.Gold {
		if !labelled[g.Item] || g.Class != d.Truth[g.Item] {
			t.Fatalf("bad gold %+v", g)
		}
	}
	if len(d.Gold) < 50 {
		t.Errorf("%d gold items, want ≥ 50", len(d.Gold))
	}
	// Resubmitters trip the repeat-offender rule (more than 2 items more than 5 times each).
	offenders := map[string]int{}
	for k, n := range repeats {
		if n > 5 {
			offenders[k[0]]++
		}
	}
	tripped := 0
	for a, n := range offenders {
		if d.Types[a] != Resubmitter {
			t.Errorf("%s (%s) repeated labels", a, d.Types[a])
		}
		if n > 2 {
			tripped++
		}
	}
	if tripped == 0 {
		t.Error("no resubmitter labelled more than 2 items more than 5 times")
	}
	// Among the labelled images the true class mix is the same at every magnification.
	mag := map[string]string{}
	for _, it := range d.Images.Items {
		mag[it.ID] = it.Covariates["magnification"]
	}
	count := map[string]map[string]int{}
	for id := range labelled {
		if m, ok := mag[id]; ok {
			if count[m] == nil {
				count[m] = map[string]int{}
			}
			count[m][d.Truth[id]]++
		}
	}
	if len(count) != 3 || !reflect.DeepEqual(count["10"], count["20"]) || !reflect.DeepEqual(count["10"], count["40"]) {
		t.Errorf("labelled images per magnification and class %v, want the same counts in every stratum", count)
	}
	// The crowd's chain → rod confusion is stronger at 10× than at 40×.
	rod, chain := map[string]float64{}, map[string]float64{}
	for _, l := range d.Labels {
		if m, ok := mag[l.Item]; ok && d.Truth[l.Item] == Chain && d.Types[l.Annotator] != Spammer {
			chain[m]++
			if l.Class == Rod {
				rod[m]++
			}
		}
	}
	if r10, r40 := rod["10"]/chain["10"], rod["40"]/chain["40"]; r10 < r40+0.15 {
		t.Errorf("chain → rod rate %.2f at 10×, %.2f at 40×; want 10× well above", r10, r40)
	}
}

func smallDemo(t *testing.T, seed uint64) *Demo {
	t.Helper()
	d, err := NewDemo(DemoConfig{
		Dir:    t.TempDir(),
		Text:   TextConfig{Reports: 60},
		Images: ImageConfig{PerMagnification: 20, PerSlide: 10, Size: 48},
	}, seed)
	if err != nil {
		t.Fatal(err)
	}
	return d
}

func TestDemoDeterministic(t *testing.T) {
	a, b, c := smallDemo(t, 4), smallDemo(t, 4), smallDemo(t, 5)
	if !reflect.DeepEqual(a.Labels, b.Labels) || !reflect.DeepEqual(a.Gold, b.Gold) || !reflect.DeepEqual(a.Truth, b.Truth) || !reflect.DeepEqual(a.Types, b.Types) {
		t.Fatal("same seed gave different labels, gold, truth or types")
	}
	for i := range a.Items {
		x, y := a.Items[i], b.Items[i]
		x.Path, y.Path = "", ""
		if !reflect.DeepEqual(x, y) {
			t.Fatalf("item %d differs: %+v vs %+v", i, x, y)
		}
	}
	if reflect.DeepEqual(a.Labels, c.Labels) {
		t.Fatal("a different seed gave the same labels")
	}
	var batch []string
	for i, it := range a.Items {
		if i%7 == 0 {
			batch = append(batch, it.ID)
		}
	}
	la, err := a.Answer(batch, 3, 1)
	if err != nil {
		t.Fatal(err)
	}
	lb, _ := b.Answer(batch, 3, 1)
	if !reflect.DeepEqual(la, lb) {
		t.Fatal("same seed and batch gave different answers")
	}
	before := map[[2]string]bool{}
	for _, l := range a.Labels {
		before[[2]string{l.Item, l.Annotator}] = true
	}
	per := map[string]map[string]bool{}
	for _, l := range la {
		if before[[2]string{l.Item, l.Annotator}] {
			t.Fatalf("%s answered %s again in the next batch", l.Annotator, l.Item)
		}
		if per[l.Item] == nil {
			per[l.Item] = map[string]bool{}
		}
		per[l.Item][l.Annotator] = true
	}
	for _, id := range batch {
		if len(per[id]) != 3 {
			t.Fatalf("%s: %d annotators in the next batch, want 3", id, len(per[id]))
		}
	}
	if _, err := a.Answer([]string{"no-such-item"}, 3, 2); err == nil {
		t.Error("unknown item: no error")
	}
	if _, err := NewDemo(DemoConfig{}, 1); err == nil {
		t.Error("no directory: no error")
	}
}

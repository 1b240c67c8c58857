package sim

import (
	"math"
	"reflect"
	"strconv"
	"strings"
	"testing"
)

func goodSpec() CrowdSpec {
	return CrowdSpec{Careful: .3, Average: .4, Careless: .1, Spammer: .2, LabelsPerItem: 5, Classes: 3,
		Prevalence: []float64{.5, .3, .2}, Items: 2000, Annotators: 50}
}

func TestCrowdSpecValidate(t *testing.T) {
	if err := goodSpec().Validate(); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		edit func(*CrowdSpec)
	}{
		{"shares sum", func(s *CrowdSpec) { s.Careful = .5 }},
		{"negative share", func(s *CrowdSpec) { s.Careful, s.Average = -.1, .8 }},
		{"NaN share", func(s *CrowdSpec) { s.Spammer = math.NaN() }},
		{"one class", func(s *CrowdSpec) { s.Classes, s.Prevalence = 1, nil }},
		{"prevalence length", func(s *CrowdSpec) { s.Prevalence = []float64{.5, .5} }},
		{"prevalence sum", func(s *CrowdSpec) { s.Prevalence = []float64{.5, .5, .5} }},
		{"prevalence NaN", func(s *CrowdSpec) { s.Prevalence = []float64{math.NaN(), .5, .5} }},
		{"no items", func(s *CrowdSpec) { s.Items = 0 }},
		{"no annotators", func(s *CrowdSpec) { s.Annotators = 0 }},
		{"no labels", func(s *CrowdSpec) { s.LabelsPerItem = 0 }},
		{"more labels than people", func(s *CrowdSpec) { s.LabelsPerItem = 51 }},
	} {
		s := goodSpec()
		tc.edit(&s)
		if err := s.Validate(); err == nil {
			t.Errorf("%s: no error", tc.name)
		}
		if _, err := s.Generate(1); err == nil {
			t.Errorf("%s: Generate gave no error", tc.name)
		}
	}
}

func TestCrowdSpecGenerate(t *testing.T) {
	s := goodSpec()
	a, err := s.Generate(3)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := s.Generate(3)
	if !reflect.DeepEqual(a, b) {
		t.Fatal("same seed gave different crowds")
	}
	c, _ := s.Generate(4)
	if reflect.DeepEqual(a.Labels, c.Labels) {
		t.Fatal("different seeds gave the same labels")
	}
	if len(a.Labels) != s.Items*s.LabelsPerItem {
		t.Fatalf("%d labels, want %d", len(a.Labels), s.Items*s.LabelsPerItem)
	}
	per := map[string]map[string]bool{}
	right, all := map[Type]float64{}, map[Type]float64{}
	for _, l := range a.Labels {
		if per[l.Item] == nil {
			per[l.Item] = map[string]bool{}
		}
		per[l.Item][l.Annotator] = true
		ty := a.Types[l.Annotator]
		all[ty]++
		if l.Class == a.Truth[l.Item] {
			right[ty]++
		}
	}
	for item, who := range per {
		if len(who) != s.LabelsPerItem {
			t.Fatalf("%s: %d distinct annotators, want %d", item, len(who), s.LabelsPerItem)
		}
	}
	count := map[string]int{}
	for _, k := range a.Truth {
		count[k]++
	}
	if count["c1"] != 1000 || count["c2"] != 600 || count["c3"] != 400 {
		t.Errorf("true class counts %v, want 1000/600/400", count)
	}
	types := map[Type]int{}
	for _, ty := range a.Types {
		types[ty]++
	}
	if types[Careful] != 15 || types[Average] != 20 || types[Careless] != 5 || types[Spammer] != 10 {
		t.Errorf("types %v, want 15 careful, 20 average, 5 careless, 10 spammers", types)
	}
	if acc := right[Spammer] / all[Spammer]; math.Abs(acc-1.0/3) > 0.03 {
		t.Errorf("spammer accuracy %.3f, want chance 1/3 ± 0.03", acc)
	}
	if acc := right[Careful] / all[Careful]; acc < 0.88 {
		t.Errorf("careful accuracy %.3f, want ≥ 0.88", acc)
	}
}

func TestCrowdSpecStreamMatchesGenerate(t *testing.T) {
	s := goodSpec()
	s.Items = 300
	p, err := s.Generate(8)
	if err != nil {
		t.Fatal(err)
	}
	var got [][3]int
	truth, crowd, err := s.Stream(8, func(item, a, class int) { got = append(got, [3]int{item, a, class}) })
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != len(p.Labels) || len(truth) != s.Items || len(crowd.Annotators) != s.Annotators {
		t.Fatalf("stream gave %d labels, %d truths, %d annotators", len(got), len(truth), len(crowd.Annotators))
	}
	for i, g := range got {
		l := p.Labels[i]
		if l.Item != "i"+strconv.Itoa(g[0]+1) || l.Annotator != crowd.Annotators[g[1]].ID || l.Class != p.Codebook.Classes[g[2]].Key {
			t.Fatalf("label %d: stream gave %v, generate %+v", i, g, l)
		}
	}
	for i, c := range truth {
		if p.Truth["i"+strconv.Itoa(i+1)] != p.Codebook.Classes[c].Key {
			t.Fatalf("item %d: truths differ", i)
		}
	}
}

// A sparse spec: people give MinLabels–MaxLabels labels each (the last to
// arrive may give fewer: the items ran out), every item gets its labels, and
// the shared confusion shows in the answers of non-careful people.
func TestSparseSpec(t *testing.T) {
	s := CrowdSpec{Careful: 0.3, Average: 0.5, Careless: 0.2, Classes: 3, Items: 3000, LabelsPerItem: 3,
		MinLabels: 10, MaxLabels: 40, Shared: []Shared{{From: "c1", To: "c2", Rate: 0.4}}}
	per := map[int]int{}
	var c1, c1as2 int
	items := map[int]int{}
	truth, crowd, err := s.Stream(3, func(item, a, class int) {
		per[a]++
		items[item]++
	})
	if err != nil {
		t.Fatal(err)
	}
	_, _, err = s.Stream(3, func(item, a, class int) {
		if truth[item] == 0 && crowd.Annotators[a].Type != Careful {
			c1++
			if class == 1 {
				c1as2++
			}
		}
	})
	if err != nil {
		t.Fatal(err)
	}
	over := 0
	for _, n := range per {
		if n > 40 {
			over++
		}
	}
	if over > 0 || len(per) < 3000*3/40 {
		t.Errorf("%d people, %d gave more than 40 labels", len(per), over)
	}
	for i := 0; i < s.Items; i++ {
		if items[i] != 3 {
			t.Fatalf("item %d has %d labels, want 3", i, items[i])
		}
	}
	if share := float64(c1as2) / float64(c1); share < 0.4 {
		t.Errorf("c1 answered as c2 by non-careful people %.2f of the time, want ≥ the shared 0.4", share)
	}
	bad := s
	bad.Shared = []Shared{{From: "c1", To: "c7", Rate: 0.3}}
	if err := bad.Validate(); err == nil || !strings.Contains(err.Error(), "c7") {
		t.Errorf("a shared confusion naming c7 of 3 classes: %v", err)
	}
}

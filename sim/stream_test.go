package sim

import (
	"fmt"
	"math"
	"reflect"
	"testing"

	"handoff"
)

func streamTasks(cb handoff.Codebook, n int) []Task {
	tasks := make([]Task, n)
	for i := range tasks {
		tasks[i] = Task{Item: fmt.Sprintf("it%05d", i), Truth: cb.Classes[i%len(cb.Classes)].Key}
	}
	return tasks
}

func TestStreamSparsePeople(t *testing.T) {
	cb := TopicCodebook()
	s, err := NewStream(StreamConfig{Shared: []Shared{{From: "pollution", To: "litter", Rate: 0.3}}}, 7)
	if err != nil {
		t.Fatal(err)
	}
	tasks := streamTasks(cb, 3000)
	labels, err := s.Answer(cb, nil, tasks[:2000], 5, 0)
	if err != nil {
		t.Fatal(err)
	}
	more, err := s.Answer(cb, nil, tasks[:1000], 2, 1) // later rounds ask more of the same items
	if err != nil {
		t.Fatal(err)
	}
	labels = append(labels, more...)
	perPerson := map[string]int{}
	onItem := map[[2]string]int{}
	for _, l := range labels {
		perPerson[l.Annotator]++
		onItem[[2]string{l.Item, l.Annotator}]++
	}
	types := s.Types()
	for id, n := range perPerson {
		if types[id] != Resubmitter && onItemMax(onItem, id) > 1 {
			t.Errorf("%s (%s) labelled an item twice", id, types[id])
		}
		if n > 70+9 { // a resubmitter's last item may run over by its copies
			t.Errorf("%s gave %d labels, budget at most 70", id, n)
		}
	}
	var small int
	for _, p := range s.People() {
		if p.Budget < 10 || p.Budget > 70 {
			t.Errorf("%s: budget %d outside 10–70", p.ID, p.Budget)
		}
		if p.Given > 0 && p.Given <= 30 {
			small++
		}
	}
	if len(perPerson) < 150 {
		t.Errorf("%d people gave %d labels; a sparse crowd needs many people", len(perPerson), len(labels))
	}
	if small*3 < len(perPerson) {
		t.Errorf("only %d of %d people gave 30 labels or fewer", small, len(perPerson))
	}
	// The shared confusion shows in the answers of the non-careful.
	var fromN, toN int
	for _, l := range labels {
		ty := types[l.Annotator]
		if ty == Careful || ty == Spammer {
			continue
		}
		var i int
		fmt.Sscanf(l.Item, "it%05d", &i)
		if cb.Classes[i%len(cb.Classes)].Key == Pollution {
			fromN++
			if l.Class == Litter {
				toN++
			}
		}
	}
	if rate := float64(toN) / float64(fromN); rate < 0.28 || rate > 0.42 {
		t.Errorf("pollution answered as litter at %.3f by the non-careful; want about 0.3 plus own errors", rate)
	}
}

func onItemMax(m map[[2]string]int, id string) int {
	b := 0
	for k, v := range m {
		if k[1] == id && v > b {
			b = v
		}
	}
	return b
}

func TestStreamDeterministic(t *testing.T) {
	cb := ParticleCodebook()
	run := func(seed uint64) []handoff.Label {
		s, err := NewStream(StreamConfig{}, seed)
		if err != nil {
			t.Fatal(err)
		}
		l, err := s.Answer(cb, nil, streamTasks(cb, 300), 3, 0)
		if err != nil {
			t.Fatal(err)
		}
		return l
	}
	a, b, c := run(3), run(3), run(4)
	if !reflect.DeepEqual(a, b) {
		t.Error("same seed, different labels")
	}
	if reflect.DeepEqual(a, c) {
		t.Error("different seeds, same labels")
	}
}

func TestStreamConfusionRows(t *testing.T) {
	cb := TopicCodebook()
	s, err := NewStream(StreamConfig{Shared: []Shared{{From: "wildlife", To: "other", Rate: 0.3}}}, 1)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.Answer(cb, nil, streamTasks(cb, 200), 5, 0); err != nil {
		t.Fatal(err)
	}
	for i, p := range s.People() {
		m := s.Confusion(cb, i)
		for r, row := range m {
			var sum float64
			for _, v := range row {
				sum += v
			}
			if math.Abs(sum-1) > 1e-9 {
				t.Fatalf("%s row %d sums to %v", p.ID, r, sum)
			}
		}
		if p.Type == Average || p.Type == Careless || p.Type == Resubmitter {
			if m[1][4] < 0.3 {
				t.Errorf("%s (%s): P(other | wildlife) = %.3f, want ≥ 0.3", p.ID, p.Type, m[1][4])
			}
		}
	}
}

func TestStreamBadConfig(t *testing.T) {
	cases := []StreamConfig{
		{MinLabels: 20, MaxLabels: 10},
		{Active: -1},
		{OneClass: 2},
		{Shared: []Shared{{From: "a", To: "a", Rate: 0.2}}},
		{Shared: []Shared{{From: "a", To: "b", Rate: 1.5}}},
	}
	for i, c := range cases {
		if _, err := NewStream(c, 1); err == nil {
			t.Errorf("case %d: %+v accepted", i, c)
		}
	}
	s, _ := NewStream(StreamConfig{Shared: []Shared{{From: "nope", To: "other", Rate: 0.2}}}, 1)
	if _, err := s.Answer(TopicCodebook(), nil, streamTasks(TopicCodebook(), 5), 2, 0); err == nil {
		t.Error("a shared confusion naming an unknown class was accepted")
	}
}

package selector

import (
	"math"
	"testing"
)

// A hand-worked case: topic (3 classes) with p = (0.5, 0.3, 0.2), H = 1.029653;
// severity (3 classes) asked when topic is 0 or 1, R = 0.8, with
// p = (0.8, 0.1, 0.1), H = 0.639032; a third question (2 classes) asked when
// severity is 2, R = 0.8·0.1 = 0.08 (0.8/3 without a severity machine).
func TestTreeUncertainty(t *testing.T) {
	tree := []TreeQuestion{{Parent: -1, K: 3}, {Parent: 0, In: []int{0, 1}, K: 3}, {Parent: 1, In: []int{2}, K: 2}}
	topic, sev, third := []float64{0.5, 0.3, 0.2}, []float64{0.8, 0.1, 0.1}, []float64{0.5, 0.5}
	ln2, ln3 := math.Log(2), math.Log(3)
	for _, c := range []struct {
		name  string
		proba [][]float64
		want  float64
	}{
		{"all machines", [][]float64{topic, sev, third}, 1.029653 + 0.8*0.639032 + 0.08*ln2},
		{"no severity machine", [][]float64{topic, nil, third}, 1.029653 + 0.8*ln3 + 0.8/3*ln2},
		{"no machine at all", [][]float64{nil, nil, nil}, ln3 + 2.0/3*ln3 + 2.0/9*ln2},
	} {
		got, err := TreeUncertainty(tree, c.proba)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if math.Abs(got-c.want) > 1e-5 {
			t.Errorf("%s: U = %.6f, want %.6f", c.name, got, c.want)
		}
	}
	// One question: the entropy.
	if got, _ := TreeUncertainty(tree[:1], [][]float64{topic}); math.Abs(got-EntropyScore(topic)) > 1e-12 {
		t.Errorf("one question: U = %v, want H = %v", got, EntropyScore(topic))
	}
	for _, bad := range [][][]float64{{topic}, {topic, {0.5, 0.5}, third}, {topic, {0.9, 0.9, -0.8}, third}} {
		if _, err := TreeUncertainty(tree, bad); err == nil {
			t.Errorf("%v accepted", bad)
		}
	}
}

// The selector ranks model-unsure picks by Pool.Uncertainty when given: an
// item sure of its topic but likely to reach an unsure follow-up goes
// before one less sure of its topic that will not reach it.
func TestSelectTreeUncertainty(t *testing.T) {
	tree := []TreeQuestion{{Parent: -1, K: 3}, {Parent: 0, In: []int{0}, K: 3}}
	topics := [][]float64{{0.9, 0.05, 0.05}, {0.1, 0.2, 0.7}, {0.05, 0.05, 0.9}}
	sevs := [][]float64{{0.34, 0.33, 0.33}, {0.9, 0.05, 0.05}, {1.0 / 3, 1.0 / 3, 1.0 / 3}}
	pool := Pool{State: []State{Unlabelled, Unlabelled, Unlabelled}, Proba: topics, Uncertainty: make([]float64, 3)}
	for i := range topics {
		u, err := TreeUncertainty(tree, [][]float64{topics[i], sevs[i]})
		if err != nil {
			t.Fatal(err)
		}
		pool.Uncertainty[i] = u
	}
	// Topic entropy alone ranks item 1 first.
	if EntropyScore(topics[1]) <= EntropyScore(topics[0]) {
		t.Fatal("the case needs item 1 less sure of its topic than item 0")
	}
	picks, err := Select(pool, Plan{Unsure: 2, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	if len(picks) != 2 || picks[0].Item != 0 || picks[1].Item != 1 || picks[0].Score != pool.Uncertainty[0] {
		t.Errorf("picks %+v, want item 0 (U %.3f) then 1 (U %.3f)", picks, pool.Uncertainty[0], pool.Uncertainty[1])
	}
	pool.Uncertainty = nil
	picks, _ = Select(pool, Plan{Unsure: 1, Seed: 1})
	if picks[0].Item != 1 {
		t.Errorf("without the tree's uncertainty the pick is %d, want 1", picks[0].Item)
	}
}

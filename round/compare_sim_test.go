package round

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"handoff"
	"handoff/compare"
	"handoff/sim"
	"handoff/store"
)

// waveScenario is a simulated project: parents with their own mix of the
// urgency classes, items drawn from it, and a stream crowd per wave.
type waveScenario struct {
	cb    handoff.Codebook
	items []handoff.Item
	tasks []sim.Task
	truth []int // per item, codebook index
}

func newWaveScenario(t *testing.T, parents, perParent int, seed uint64) *waveScenario {
	t.Helper()
	cb := sim.UrgencyCodebook()
	K := len(cb.Classes)
	rng := rand.New(rand.NewPCG(seed, 17))
	sc := &waveScenario{cb: cb}
	for g := range parents {
		// A parent's level sets its class mix: most items near the level.
		level := rng.Float64() * float64(K-1)
		for j := range perParent {
			c := int(math.Round(level + rng.NormFloat64()*0.8))
			c = max(0, min(K-1, c))
			id := fmt.Sprintf("d%02d-%d", g, j)
			sc.items = append(sc.items, handoff.Item{ID: id, Kind: handoff.KindText, Text: "sentence " + id, Parent: fmt.Sprintf("d%02d", g), Position: j})
			sc.tasks = append(sc.tasks, sim.Task{Item: id, Truth: cb.Classes[c].Key})
			sc.truth = append(sc.truth, c)
		}
	}
	return sc
}

// wave has a fresh stream crowd of the same population label every item
// with 5 labels, as wave w; with shift > 0, every item of a class below
// the top looks one class higher to everyone with probability shift (a
// bias the whole crowd of that wave shares, sim.Bias).
func (sc *waveScenario) wave(t *testing.T, w int, shift float64, seed uint64) []handoff.Label {
	t.Helper()
	s, err := sim.NewStream(sim.StreamConfig{}, seed)
	if err != nil {
		t.Fatal(err)
	}
	tasks, bias := sc.tasks, sim.Bias(nil)
	if shift > 0 {
		K := len(sc.cb.Classes)
		rows := make([][]float64, K)
		for c := range rows {
			rows[c] = make([]float64, K)
			if c == K-1 {
				rows[c][c] = 1
				continue
			}
			rows[c][c], rows[c][c+1] = 1-shift, shift
		}
		bias = sim.Bias{"shifted": rows}
		tasks = make([]sim.Task, len(sc.tasks))
		for i, tk := range sc.tasks {
			tk.Stratum = "shifted"
			tasks[i] = tk
		}
	}
	ls, err := s.Answer(sc.cb, bias, tasks, 5, w-1)
	if err != nil {
		t.Fatal(err)
	}
	for i := range ls {
		ls[i].Wave = w
	}
	return ls
}

func (sc *waveScenario) store(t *testing.T, labels ...[]handoff.Label) *store.Store {
	t.Helper()
	st, err := store.Create(t.TempDir(), sc.cb, "test")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	if _, err := st.PutItems(sc.items, false, "test"); err != nil {
		t.Fatal(err)
	}
	for _, ls := range labels {
		if _, err := st.PutLabels(ls, "test"); err != nil {
			t.Fatal(err)
		}
	}
	return st
}

// waveConfusion is the consensus of one wave against the truth:
// C[t][j] = share of items of true class t whose consensus is j, with the
// class prior π over the items the consensus covers.
func waveConfusion(t *testing.T, st *store.Store, sc *waveScenario, w uint16) (C [][]float64, prior []float64, cls []int) {
	t.Helper()
	sn, err := st.Snapshot(store.SnapshotOptions{Times: true, Waves: true})
	if err != nil {
		t.Fatal(err)
	}
	p, err := projectOf(sn)
	if err != nil {
		t.Fatal(err)
	}
	cr, err := consensus(p.onlyWave(sn.Labels.Wave, w), DefaultConsensus())
	if err != nil {
		t.Fatal(err)
	}
	K := len(sc.cb.Classes)
	c := &comparer{p: p, K: K}
	cls, _ = c.crowdClasses(cr)
	C = make([][]float64, K)
	n := make([]float64, K)
	for i := range C {
		C[i] = make([]float64, K)
	}
	tot := 0.0
	for i, k := range cls {
		if k < 0 {
			continue
		}
		// Items are in store order, which is the scenario's order.
		tr := sc.truth[p.index[sc.items[i].ID]]
		C[tr][k]++
		n[tr]++
		tot++
	}
	prior = make([]float64, K)
	for tr := range C {
		prior[tr] = n[tr] / tot
		for k := range C[tr] {
			C[tr][k] /= n[tr]
		}
	}
	return C, prior, cls
}

// impliedKappa is Cohen's kappa that two codings with confusions A and B
// against the truth (prior π) have when their errors are independent given
// the truth: joint P(j, l) = Σ_t π_t A[t][j] B[t][l].
func impliedKappa(prior []float64, A, B [][]float64) float64 {
	K := len(prior)
	var po, pe float64
	ma, mb := make([]float64, K), make([]float64, K)
	for tr, pt := range prior {
		for j := range K {
			po += pt * A[tr][j] * B[tr][j]
			ma[j] += pt * A[tr][j]
			mb[j] += pt * B[tr][j]
		}
	}
	for j := range K {
		pe += ma[j] * mb[j]
	}
	return (po - pe) / (1 - pe)
}

// impliedPositionR is Pearson's r between the two waves' mean positions
// over the parents that the simulation implies: for parent g with items
// I_g, wave w's position has mean m_wg = (1/n_g) Σ_i Σ_j (j+1) C_w[t_i][j]
// and variance v_wg = (1/n_g²) Σ_i Var_i given the truth, errors being
// independent across waves, so r ≈ cov_g(m_1, m_2) / √((var_g m_1 + mean
// v_1)(var_g m_2 + mean v_2)).
func impliedPositionR(sc *waveScenario, parents, perParent int, A, B [][]float64) float64 {
	K := len(sc.cb.Classes)
	mom := func(C [][]float64, tr int) (m, v float64) {
		var m2 float64
		for j := range K {
			m += float64(j+1) * C[tr][j]
			m2 += float64((j+1)*(j+1)) * C[tr][j]
		}
		return m, m2 - m*m
	}
	ma, mb, va, vb := make([]float64, parents), make([]float64, parents), make([]float64, parents), make([]float64, parents)
	for g := range parents {
		n := float64(perParent)
		for j := range perParent {
			tr := sc.truth[g*perParent+j]
			m, v := mom(A, tr)
			ma[g] += m / n
			va[g] += v / (n * n)
			m, v = mom(B, tr)
			mb[g] += m / n
			vb[g] += v / (n * n)
		}
	}
	mean := func(x []float64) float64 {
		s := 0.0
		for _, v := range x {
			s += v
		}
		return s / float64(len(x))
	}
	a, b := mean(ma), mean(mb)
	var cov, sa, sb float64
	for g := range parents {
		cov += (ma[g] - a) * (mb[g] - b)
		sa += (ma[g] - a) * (ma[g] - a)
		sb += (mb[g] - b) * (mb[g] - b)
	}
	G := float64(parents)
	return (cov / G) / math.Sqrt((sa/G+mean(va))*(sb/G+mean(vb)))
}

func findComparison(t *testing.T, r *compare.Report, kind, a, b string) compare.Comparison {
	t.Helper()
	for _, c := range r.Comparisons {
		if c.Kind == kind && c.A == a && c.B == b {
			return c
		}
	}
	t.Fatalf("no %s comparison %s vs %s in %+v", kind, a, b, r.Comparisons)
	return compare.Comparison{}
}

func positionOf(t *testing.T, c compare.Comparison) compare.Parents {
	t.Helper()
	for _, p := range c.Parents {
		if p.Measure == handoff.PositionQuestion {
			return p
		}
	}
	t.Fatalf("no position measure in %s vs %s", c.A, c.B)
	return compare.Parents{}
}

// Two waves of the same simulated crowd agree as well as the simulation
// implies; a wave whose crowd shares an upward bias (30% of the items look
// one class higher to everyone) agrees visibly less: its kappa's interval
// lies below the first pair's, its mean absolute difference's above.
func TestWavesTestRetest(t *testing.T) {
	const parents, perParent = 60, 8
	sc := newWaveScenario(t, parents, perParent, 3)
	w1, w2, w3 := sc.wave(t, 1, 0, 101), sc.wave(t, 2, 0, 202), sc.wave(t, 3, 0.3, 303)
	st := sc.store(t, w1, w2, w3)
	opt := compare.Options{Bootstrap: compare.Bootstrap{Reps: 1000, Seed: 9}}
	rep, err := Compare(st, CompareConfig{Options: opt})
	if err != nil {
		t.Fatal(err)
	}
	same := findComparison(t, rep, "waves", "wave 1", "wave 2")
	shifted := findComparison(t, rep, "waves", "wave 1", "wave 3")
	C1, prior, _ := waveConfusion(t, st, sc, 1)
	C2, _, _ := waveConfusion(t, st, sc, 2)
	acc1 := 0.0
	for tr := range prior {
		acc1 += prior[tr] * C1[tr][tr]
	}
	k := same.Items.Kappa
	want := impliedKappa(prior, C1, C2)
	t.Logf("wave 1 consensus accuracy %.3f; wave 1 vs 2: items %d, kappa %s (implied %.3f), alpha %s, accuracy %s",
		acc1, same.Items.N, k, want, same.Items.Alpha, same.Items.Accuracy)
	if !k.Defined || k.Lo > want || k.Hi < want {
		t.Errorf("kappa %s does not include the implied %.3f", k, want)
	}
	if k.Value < 0.7 {
		t.Errorf("test–retest kappa %.3f, want high (≥ 0.7)", k.Value)
	}
	r := positionOf(t, same).Pearson
	wantR := impliedPositionR(sc, parents, perParent, C1, C2)
	t.Logf("parents %d: position r %s (implied %.3f), Spearman %s, MAD %s", positionOf(t, same).N, r, wantR, positionOf(t, same).Spearman, positionOf(t, same).MAD)
	if !r.Defined || r.Lo > wantR || r.Hi < wantR {
		t.Errorf("position r %s does not include the implied %.3f", r, wantR)
	}
	ks, rs, ms := shifted.Items.Kappa, positionOf(t, shifted).Pearson, positionOf(t, shifted).MAD
	t.Logf("wave 1 vs shifted wave 3: kappa %s, position r %s, MAD %s", ks, rs, ms)
	if !(ks.Hi < k.Lo) {
		t.Errorf("shifted wave kappa %s not visibly below %s", ks, k)
	}
	if !(ms.Lo > positionOf(t, same).MAD.Hi) {
		t.Errorf("shifted wave MAD %s not visibly above %s", ms, positionOf(t, same).MAD)
	}
	// Only the named waves are compared; a wave without labels is an error.
	rep, err = Compare(st, CompareConfig{Waves: []int{2, 1}, Options: opt})
	if err != nil || len(rep.Comparisons) != 1 || rep.Comparisons[0].A != "wave 1" {
		t.Errorf("waves 2,1: %v, %+v", err, rep)
	}
	if _, err := Compare(st, CompareConfig{Waves: []int{1, 5}}); err == nil {
		t.Errorf("a wave without labels was accepted")
	}
}

// A simulated expert coding with error rate e: the crowd's accuracy
// against it is about 1 − e (less where the crowd errs too), and its
// interval includes the value the simulation implies,
// Σ_t π_t Σ_j C[t][j]·E[t][j] with E the expert's confusion (1 − e on the
// diagonal, e spread evenly over the other classes).
func TestExpertValidity(t *testing.T) {
	const parents, perParent, e = 60, 8, 0.1
	sc := newWaveScenario(t, parents, perParent, 5)
	st := sc.store(t, sc.wave(t, 1, 0, 77))
	K := len(sc.cb.Classes)
	rng := rand.New(rand.NewPCG(5, 55))
	ref := handoff.Reference{Name: "experts", Source: "sim"}
	for i, it := range sc.items {
		c := sc.truth[i]
		if rng.Float64() < e {
			c = (c + 1 + rng.IntN(K-1)) % K
		}
		ref.Items = append(ref.Items, handoff.ReferenceLabel{Item: it.ID, Class: sc.cb.Classes[c].Key})
	}
	if err := st.PutReference(ref, false, "test"); err != nil {
		t.Fatal(err)
	}
	rep, err := Compare(st, CompareConfig{Options: compare.Options{Bootstrap: compare.Bootstrap{Reps: 1000, Seed: 2}}})
	if err != nil {
		t.Fatal(err)
	}
	c := findComparison(t, rep, "reference", "crowd consensus", "experts")
	C, prior, _ := waveConfusion(t, st, sc, 1)
	want, crowdAcc := 0.0, 0.0
	for tr := range prior {
		crowdAcc += prior[tr] * C[tr][tr]
		for j := range K {
			ej := e / float64(K-1)
			if j == tr {
				ej = 1 - e
			}
			want += prior[tr] * C[tr][j] * ej
		}
	}
	acc := c.Items.Accuracy
	t.Logf("crowd accuracy %.3f against the truth; against the expert (e = %.2f): %s over %d items (implied %.3f, 1 − e = %.2f); kappa %s",
		crowdAcc, e, acc, c.Items.N, want, 1-e, c.Items.Kappa)
	if !acc.Defined || acc.Lo > want || acc.Hi < want {
		t.Errorf("accuracy %s does not include the implied %.3f", acc, want)
	}
	if math.Abs(want-(1-e)) > (1-crowdAcc)+0.01 {
		t.Errorf("implied %.3f is further from 1 − e than the crowd's own error explains", want)
	}
	// The machine has no round yet: no estimate, and why.
	m := findComparison(t, rep, "machine", "machine", "experts")
	if m.Items != nil || m.ItemsNote == "" {
		t.Errorf("machine comparison without a round: %+v", m)
	}
}

// Parent scores from an expert who knows each report's true mean position:
// the crowd's roll-up follows them closely, over every item of the scored
// parents, and a score for a parent nobody labelled is left out with a
// note.
func TestParentScoreReference(t *testing.T) {
	const parents, perParent = 40, 8
	sc := newWaveScenario(t, parents, perParent, 8)
	var ls []handoff.Label
	for _, l := range sc.wave(t, 1, 0, 88) {
		if l.Item[:3] != "d39" { // report d39 gets no labels
			ls = append(ls, l)
		}
	}
	st := sc.store(t, ls)
	ref := handoff.Reference{Name: "panel"}
	for g := range parents {
		sum := 0
		for j := range perParent {
			sum += sc.truth[g*perParent+j] + 1
		}
		ref.Parents = append(ref.Parents, handoff.ReferenceScore{Parent: fmt.Sprintf("d%02d", g), Value: float64(sum) / perParent})
	}
	if err := st.PutReference(ref, false, "test"); err != nil {
		t.Fatal(err)
	}
	rep, err := Compare(st, CompareConfig{Options: compare.Options{Bootstrap: compare.Bootstrap{Reps: 500, Seed: 1}}})
	if err != nil {
		t.Fatal(err)
	}
	c := findComparison(t, rep, "reference", "crowd consensus", "panel")
	p := positionOf(t, c)
	t.Logf("crowd vs true positions: %d parents, r %s, MAD %s; notes %q", p.N, p.Pearson, p.MAD, c.Notes)
	if p.N != parents-1 || p.Pearson.Value < 0.95 || p.MAD.Value > 0.2 || c.Items != nil {
		t.Errorf("parents %+v", p)
	}
	wantNotes := []string{"1 parent scores left out", fmt.Sprintf("%d of the %d items", (parents-1)*perParent, parents*perParent)}
	for _, w := range wantNotes {
		found := false
		for _, n := range c.Notes {
			found = found || strings.Contains(n, w)
		}
		if !found {
			t.Errorf("notes %q lack %q", c.Notes, w)
		}
	}
}

package honest

import (
	"fmt"
	"math"
	"math/rand/v2"

	"handoff"
	"handoff/crowd"
	"handoff/round"
	"handoff/sim"
	"handoff/verdict"
)

// Rule is a way of spending α across the looks a team takes: Alpha(r) is
// the α the look r ≥ 1 tests at.
type Rule struct {
	Name  string
	Alpha func(alpha float64, r int) float64
}

// The rules compared. OneLook tests every look at the full α, as if each
// were the only one.
var (
	RuleOurs    = Rule{"α/(r(r+1)) (ours)", verdict.LookAlpha}
	RuleHalving = Rule{"α·2^−r", func(a float64, r int) float64 { return a * math.Pow(2, -float64(r)) }}
	RuleSquares = Rule{"α·6/(π²r²)", func(a float64, r int) float64 { return a * 6 / (math.Pi * math.Pi * float64(r*r)) }}
	RuleOneLook = Rule{"one look: α at every round (no spending)", func(a float64, r int) float64 { return a }}
	// RulePlugIn takes the lowest threshold whose observed risk is at most
	// max-error among those covering at least the look-1 minimum count (no
	// bound at all), for comparison; its Alpha is unused.
	RulePlugIn = Rule{"plug-in: observed risk ≤ max-error (no bound)", nil}
	Rules      = []Rule{RuleOurs, RuleHalving, RuleSquares, RuleOneLook, RulePlugIn}
)

// LooksConfig describes the simulated projects of RunLooks. Zero values
// take the defaults shown.
type LooksConfig struct {
	Projects int     // default 500
	Archive  int     // items per project, default 3000
	Classes  int     // default 4
	Rounds   int     // most rounds before giving up, default 15
	MaxError float64 // default 0.05
	Level    float64 // confidence over all looks, default 0.95
	Seed     uint64
	// Method is the consensus method (crowd.Combine); "" means the
	// project default, round.DefaultConsensus().
	Method string
	// MinLabels, if > 0, also requires this many kept labels for the
	// reference standard (exploration).
	MinLabels int
}

// RuleResult counts one rule's outcomes over the projects.
type RuleResult struct {
	Rule   string
	Go     int     // projects that reached GO within the rounds
	Exceed int     // of those, GO verdicts whose autolabelled items' error against the truth exceeds max-error
	Look   float64 // mean look of the first GO
	// ExceedRef counts GO verdicts whose autolabelled items' disagreement
	// with the reference (what the bound is about) exceeds max-error,
	// measured on the held-out items' reference labels at the threshold:
	// not reported against the truth, for comparison.
	Coverage float64 // mean archive coverage at GO
}

// LooksResult is the outcome of RunLooks.
type LooksResult struct {
	Config LooksConfig
	Rules  []RuleResult
	// ReferenceError is the mean share of settled held-out items whose
	// reference class differs from the truth, at the last look simulated.
	ReferenceError float64
}

// RunLooks simulates projects run as a team would, to check that the
// verdict stays honest over repeated looks: each project has an archive of
// items with known truth, a held-out set drawn as the verdict's rule draws
// it (a random share, at least round.HeldOutMinFor items — 594 — capped at
// half), a sparse crowd (sim.Stream: 10–70 labels per person, spammers,
// one-class annotators, resubmitters; per project 25–75% careful people,
// 5–20% careless, 2–15% spammers; class 0 mistaken for class 1 by everyone
// but the careful and the spammers at a rate drawn in [0.05, 0.3]) and a synthetic machine that improves round
// by round. Each round the crowd gives 3 labels to each of 50 held-out
// items — first those below the reference standard (posterior 0.99 or 9
// labels), then new ones — and to 50 training items; the consensus is
// combined over everything; the verdict tests the coverage–risk walk at the
// look's α on the held-out items first labelled at least two rounds before
// (the round's reference-lag; those below the standard counting as
// disagreements wherever covered). The team stops at the first GO and autolabels the archive above
// the threshold; the GO "exceeds" when the realised error of those items
// against the truth is above max-error. Every rule runs on the same
// projects, crowds and machines.
//
// The synthetic machine (invented, for simulation only): item i has a
// fixed ease z_i and draw v_i in [0, 1); at round r its confidence is
// c = 1/K + (1−1/K)·q with q the z_i-quantile of a Kumaraswamy(A_r, B)
// distribution, q = (1 − (1−z_i)^(1/B))^(1/A_r), so an item keeps its rank
// as the model improves; A_r = 1 + (A−1)(1 − e^(−r/τ)) rises to the
// project's strength A in [2, 12] at a pace τ in [1, 6] rounds, B lies in
// [0.3, 1.5], and the machine is right when v_i < c^γ (γ in [0.8, 1.4]:
// calibrated, over- or under-confident). When wrong on an item of class 0, it says class 1 with
// probability 0.6 — it learnt the crowd's shared confusion — and otherwise
// a random other class.
func RunLooks(cfg LooksConfig) (LooksResult, error) {
	if cfg.Projects == 0 {
		cfg.Projects = 500
	}
	if cfg.Archive == 0 {
		cfg.Archive = 3000
	}
	if cfg.Classes == 0 {
		cfg.Classes = 4
	}
	if cfg.Rounds == 0 {
		cfg.Rounds = 15
	}
	if cfg.MaxError == 0 {
		cfg.MaxError = 0.05
	}
	if cfg.Level == 0 {
		cfg.Level = 0.95
	}
	if cfg.Method == "" {
		cfg.Method = round.DefaultConsensus().Method
	}
	out := LooksResult{Config: cfg, Rules: make([]RuleResult, len(Rules))}
	for k, r := range Rules {
		out.Rules[k].Rule = r.Name
	}
	cb := handoff.Codebook{Name: "sim", Question: "Which class?"}
	for c := range cfg.Classes {
		cb.Classes = append(cb.Classes, handoff.Class{Key: fmt.Sprintf("c%d", c)})
	}
	refErr, refN := 0.0, 0
	for p := range cfg.Projects {
		res, re, err := runProject(cfg, cb, cfg.Seed*1_000_003+uint64(p))
		if err != nil {
			return out, fmt.Errorf("project %d: %w", p, err)
		}
		if re >= 0 {
			refErr += re
			refN++
		}
		for k := range Rules {
			o := res[k]
			if !o.go_ {
				continue
			}
			rr := &out.Rules[k]
			rr.Go++
			rr.Look += float64(o.look)
			rr.Coverage += o.coverage
			if o.err > cfg.MaxError {
				rr.Exceed++
			}
		}
	}
	for k := range out.Rules {
		if g := out.Rules[k].Go; g > 0 {
			out.Rules[k].Look /= float64(g)
			out.Rules[k].Coverage /= float64(g)
		}
	}
	if refN > 0 {
		out.ReferenceError = refErr / float64(refN)
	}
	return out, nil
}

type outcome struct {
	go_      bool
	look     int
	err      float64 // realised error against the truth of the autolabelled items
	coverage float64
}

// machine is the synthetic model of one project.
type machine struct {
	k                int
	A, B, tau, gamma float64
	z, v, w          []float64
}

func (m *machine) predict(i, r int, truth int) (int, float64) {
	A := 1 + (m.A-1)*(1-math.Exp(-float64(r)/m.tau))
	q := math.Pow(1-math.Pow(1-m.z[i], 1/m.B), 1/A)
	c := 1/float64(m.k) + (1-1/float64(m.k))*q
	if m.v[i] < math.Pow(c, m.gamma) {
		return truth, c
	}
	if truth == 0 && m.w[i] < 0.6 {
		return 1, c
	}
	o := int(m.w[i]*997) % (m.k - 1)
	if o >= truth {
		o++
	}
	return o, c
}

func runProject(cfg LooksConfig, cb handoff.Codebook, seed uint64) ([]outcome, float64, error) {
	rng := rand.New(rand.NewPCG(seed, 0x100c5))
	K, N := cfg.Classes, cfg.Archive
	// Truth: a skewed class prior.
	prior := make([]float64, K)
	tot := 0.0
	for c := range prior {
		prior[c] = 0.5 + rng.Float64()
		tot += prior[c]
	}
	truth := make([]int, N)
	for i := range truth {
		u := rng.Float64() * tot
		for c, p := range prior {
			if u -= p; u <= 0 || c == K-1 {
				truth[i] = c
				break
			}
		}
	}
	m := &machine{k: K, A: 2 + 10*rng.Float64(), B: 0.3 + 1.2*rng.Float64(), tau: 1 + 5*rng.Float64(), gamma: 0.8 + 0.6*rng.Float64(),
		z: make([]float64, N), v: make([]float64, N), w: make([]float64, N)}
	for i := range m.z {
		m.z[i], m.v[i], m.w[i] = rng.Float64(), rng.Float64(), rng.Float64()
	}
	// The held-out set: the round's rule (a Bernoulli sample).
	minHeld := 3 * verdict.MinCountFor(cfg.MaxError, 1-verdict.LookAlpha(1-cfg.Level, 10))
	share := math.Min(0.5, math.Max(0.1, float64(minHeld)/float64(N)))
	member := make([]bool, N)
	var members, others []int
	for i := range member {
		member[i] = rng.Float64() < share
		if member[i] {
			members = append(members, i)
		} else {
			others = append(others, i)
		}
	}
	rng.Shuffle(len(members), func(a, b int) { members[a], members[b] = members[b], members[a] })
	rng.Shuffle(len(others), func(a, b int) { others[a], others[b] = others[b], others[a] })
	mix := sim.Mix{Careful: 0.25 + 0.5*rng.Float64(), Average: 0.4, Careless: 0.05 + 0.15*rng.Float64(),
		Spammer: 0.02 + 0.13*rng.Float64(), Resubmitter: 0.03}
	crowdSim, err := sim.NewStream(sim.StreamConfig{Mix: mix, Shared: []sim.Shared{{From: "c0", To: "c1", Rate: 0.05 + 0.25*rng.Float64()}}}, seed)
	if err != nil {
		return nil, 0, err
	}
	labels := &crowd.Labels{NItems: N, NClasses: K}
	annIx := map[string]int32{}
	ask := func(items []int, round int) error {
		tasks := make([]sim.Task, len(items))
		for j, i := range items {
			tasks[j] = sim.Task{Item: fmt.Sprint(i), Truth: cb.Classes[truth[i]].Key}
		}
		ls, err := crowdSim.Answer(cb, nil, tasks, 3, round)
		if err != nil {
			return err
		}
		for j, l := range ls {
			a, ok := annIx[l.Annotator]
			if !ok {
				a = int32(len(annIx))
				annIx[l.Annotator] = a
			}
			_ = j
			var it int
			fmt.Sscan(l.Item, &it)
			c, _ := cb.Index(l.Class)
			labels.Item = append(labels.Item, int32(it))
			labels.Annotator = append(labels.Annotator, a)
			labels.Class = append(labels.Class, uint8(c))
		}
		labels.NAnnotators = len(annIx)
		return nil
	}
	// The start: 200 random items, about 20% of them held-out members.
	nextMember, nextOther := 0, 0
	var start []int
	for len(start) < 200 {
		if rng.Float64() < share && nextMember < len(members) {
			start = append(start, members[nextMember])
			nextMember++
		} else if nextOther < len(others) {
			start = append(start, others[nextOther])
			nextOther++
		}
	}
	if err := ask(start, 0); err != nil {
		return nil, 0, err
	}
	outs := make([]outcome, len(Rules))
	done := make([]bool, len(Rules))
	cohort := map[int]int{}
	const lag = 2
	refErr := -1.0
	alpha := 1 - cfg.Level
	for r := 1; r <= cfg.Rounds; r++ {
		kept, _, err := crowd.Clean(labels, nil, crowd.DefaultRules())
		if err != nil {
			return nil, 0, err
		}
		method := cfg.Method
		if method == "" {
			method = crowd.MethodAuto // the project default, round.DefaultConsensus
		}
		res, err := crowd.Combine(method, kept, crowd.Options{Seed: seed})
		if err != nil {
			return nil, 0, err
		}
		// The verdict's inputs at this look.
		var conf []float64
		var wrong []bool
		var below []int
		settledWrongTruth, settled := 0, 0
		for _, i := range members[:nextMember] {
			pred, c := m.predict(i, r, truth[i])
			if res.NLabels[i] == 0 {
				continue
			}
			if _, ok := cohort[i]; !ok {
				cohort[i] = r
			}
			row := res.Row(i)
			ref := res.Class[i]
			met := row[ref] >= 0.99 && int(res.NLabels[i]) >= cfg.MinLabels || res.NLabels[i] >= 9
			if !met {
				below = append(below, i)
			}
			if cohort[i] > r-lag {
				continue // labelled too recently to count
			}
			conf = append(conf, c)
			if met {
				wrong = append(wrong, pred != ref)
				settled++
				if ref != truth[i] {
					settledWrongTruth++
				}
			} else {
				wrong = append(wrong, true)
			}
		}
		if settled > 0 {
			refErr = float64(settledWrongTruth) / float64(settled)
		}
		if debugLooks != nil {
			_, th, _ := verdict.CoverageRisk(conf, wrong, nil, cfg.MaxError, 0.95, 0)
			debugLooks(fmt.Sprintf("r%d A%.1f B%.1f settled %d below %d refwrong %d | %s", r, m.A, m.B, settled, len(below), settledWrongTruth, th.Stop))
		}
		var arch []float64
		var archWrong []bool
		for _, i := range others[nextOther:] {
			pred, c := m.predict(i, r, truth[i])
			arch = append(arch, c)
			archWrong = append(archWrong, pred != truth[i])
		}
		for k, rule := range Rules {
			if done[k] || len(conf) == 0 {
				continue
			}
			var th verdict.Threshold
			if rule.Alpha == nil {
				pts, t0, err := verdict.CoverageRisk(conf, wrong, arch, cfg.MaxError, 1-alpha/2, 0)
				if err != nil {
					return nil, 0, err
				}
				for _, q := range pts {
					if q.N >= t0.MinCount && q.Risk <= cfg.MaxError {
						th = verdict.Threshold{Found: true, Threshold: q.Threshold, Archive: q.Archive}
					}
				}
			} else {
				_, t1, err := verdict.CoverageRisk(conf, wrong, arch, cfg.MaxError, 1-rule.Alpha(alpha, r), 0)
				if err != nil {
					return nil, 0, err
				}
				th = t1
			}
			if !th.Found {
				continue
			}
			n, e := 0, 0
			for j, c := range arch {
				if c >= th.Threshold {
					n++
					if archWrong[j] {
						e++
					}
				}
			}
			o := outcome{go_: true, look: r, coverage: th.Archive}
			if n > 0 {
				o.err = float64(e) / float64(n)
			}
			outs[k], done[k] = o, true
		}
		if !anyOpen(done) {
			break
		}
		// The next batch: 50 held-out slots, reference requests first,
		// then new held-out items; 50 training items.
		var batch []int
		for j := 0; j < 50 && j < len(below); j++ {
			batch = append(batch, below[j])
		}
		for j := len(batch); j < 50 && nextMember < len(members); j++ {
			batch = append(batch, members[nextMember])
			nextMember++
		}
		for j := 0; j < 50 && nextOther < len(others); j++ {
			batch = append(batch, others[nextOther])
			nextOther++
		}
		if err := ask(batch, r); err != nil {
			return nil, 0, err
		}
	}
	return outs, refErr, nil
}

var debugLooks func(string)

// anyOpen reports whether some rule has not yet reached GO.
func anyOpen(done []bool) bool {
	for _, d := range done {
		if !d {
			return true
		}
	}
	return false
}

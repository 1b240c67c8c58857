package sim

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"time"

	"handoff"
)

// Shared is a confusion most of the crowd shares: people other than the
// careful (and other than spammers, who ignore the item) answer To for an
// item of true class From with probability Rate, on top of their own errors:
// their confusion row of From becomes (1−Rate)·row + Rate·e_To.
type Shared struct {
	From, To string
	Rate     float64
}

// StreamConfig describes the crowd a real project gets: people arrive, give a
// few dozen labels each and leave, so most of them are known from 10–70
// labels only. Zero fields take the defaults shown.
type StreamConfig struct {
	// MinLabels and MaxLabels bound the labels one person gives before
	// leaving; each person's budget is drawn log-uniformly between them
	// (defaults 10 and 70).
	MinLabels, MaxLabels int
	// Active is the number of people at work at any time (default 15).
	// Every label goes to an active person who has not labelled the item
	// yet; when a person's budget is spent, a new person takes their place.
	Active int
	// Mix gives the shares of types among the people who arrive (default
	// StreamMix). Each arriving person's type is drawn from it.
	Mix Mix
	// OneClass is the share of spammers who always give one class (drawn
	// per spammer) instead of answering at random (default 0.4; negative
	// means none).
	OneClass float64
	// Resubmit is the chance that a resubmitter, given an item, labels it
	// 6–10 times instead of once (default 0.08).
	Resubmit float64
	// Shared confusions of the crowd (default none).
	Shared []Shared
	// Start and RoundGap place round r's labels from Start + r·RoundGap
	// (defaults 2026-03-02 08:00 UTC and 7 days), as for CrowdConfig.
	Start    time.Time
	RoundGap time.Duration
}

// StreamMix is the default mix of arriving people: 25% careful, 40%
// average, 17% careless, 15% spammers and 3% resubmitters.
func StreamMix() Mix {
	return Mix{Careful: .25, Average: .40, Careless: .17, Spammer: .15, Resubmitter: .03}
}

func (c StreamConfig) withDefaults() StreamConfig {
	if c.MinLabels == 0 {
		c.MinLabels = 10
	}
	if c.MaxLabels == 0 {
		c.MaxLabels = max(70, c.MinLabels)
	}
	if c.Active == 0 {
		c.Active = 15
	}
	if c.Mix == (Mix{}) {
		c.Mix = StreamMix()
	}
	if c.OneClass == 0 {
		c.OneClass = 0.4
	} else if c.OneClass < 0 {
		c.OneClass = 0
	}
	if c.Resubmit == 0 {
		c.Resubmit = 0.08
	}
	if c.Start.IsZero() {
		c.Start = time.Date(2026, 3, 2, 8, 0, 0, 0, time.UTC)
	}
	if c.RoundGap == 0 {
		c.RoundGap = 7 * 24 * time.Hour
	}
	return c
}

func (c StreamConfig) check() error {
	if c.MinLabels < 1 || c.MaxLabels < c.MinLabels {
		return fmt.Errorf("sim: stream: labels per person %d–%d, need 1 ≤ min ≤ max", c.MinLabels, c.MaxLabels)
	}
	if c.Active < 1 {
		return fmt.Errorf("sim: stream: active = %d, need at least 1", c.Active)
	}
	var sum float64
	for i, s := range c.Mix.shares() {
		if !(s >= 0) || math.IsInf(s, 0) {
			return fmt.Errorf("sim: stream: mix share of %s is %v, need a finite value ≥ 0", mixTypes[i], s)
		}
		sum += s
	}
	if sum <= 0 {
		return fmt.Errorf("sim: stream: mix shares sum to %v, need a positive sum", sum)
	}
	if c.OneClass > 1 || !(c.Resubmit >= 0 && c.Resubmit <= 1) {
		return fmt.Errorf("sim: stream: one-class share %v and resubmit %v must lie in [0, 1]", c.OneClass, c.Resubmit)
	}
	for i, s := range c.Shared {
		if !(s.Rate >= 0 && s.Rate <= 1) || s.From == s.To {
			return fmt.Errorf("sim: stream: shared[%d]: %s → %s at %v: need two different classes and a rate in [0, 1]", i, s.From, s.To, s.Rate)
		}
	}
	return nil
}

// Person is one simulated person of a Stream with their hidden traits.
type Person struct {
	Annotator
	Budget int // labels they give before leaving
	Given  int // labels given so far
}

// Stream is a simulated crowd of people who come, label a few dozen items
// and leave (see StreamConfig). Like Crowd it answers next batches with
// Answer; it is deterministic given its seed and the sequence of Answer
// calls, and not safe for concurrent use.
type Stream struct {
	cfg    StreamConfig
	seed   uint64
	people []Person
	conf   map[string][][]float64 // codebook signature → person → K×K row-major
	active []int                  // indices into people
	on     map[string][]int       // item → people who labelled it
	calls  uint64
	clock  []time.Time
	round  int
}

// NewStream returns a stream crowd; people are drawn as they arrive: person
// n (IDs "p0001", "p0002", …) gets a type drawn from Mix, an accuracy drawn as
// for NewCrowd, a budget drawn log-uniformly in [MinLabels, MaxLabels] and a
// speed as for NewCrowd, all from (seed, n) alone.
func NewStream(cfg StreamConfig, seed uint64) (*Stream, error) {
	cfg = cfg.withDefaults()
	if err := cfg.check(); err != nil {
		return nil, err
	}
	s := &Stream{cfg: cfg, seed: seed, conf: map[string][][]float64{}, on: map[string][]int{}, round: -1}
	for range cfg.Active {
		s.active = append(s.active, s.arrive())
	}
	return s, nil
}

// arrive draws the next person and returns their index.
func (s *Stream) arrive() int {
	n := len(s.people)
	r := newRand(s.seed, 0x5e0b1e, uint64(n))
	t := mixTypes[categorical(r, s.cfg.Mix.shares())]
	a := Annotator{ID: fmt.Sprintf("p%04d", n+1), Type: t}
	if t == Spammer {
		a.OneClass = r.Float64() < s.cfg.OneClass
	} else {
		m := typeAccuracy[t]
		a.Accuracy = clamp(m[0]+m[1]*r.NormFloat64(), 0.3, 0.99)
	}
	a.Activity = 1
	a.Seconds = lognormal(r, typeSeconds[t], 0.25)
	a.offset = time.Duration(r.Float64() * float64(10*time.Hour)).Truncate(time.Second)
	lo, hi := math.Log(float64(s.cfg.MinLabels)), math.Log(float64(s.cfg.MaxLabels)+1)
	budget := min(s.cfg.MaxLabels, int(math.Exp(lo+(hi-lo)*r.Float64())))
	s.people = append(s.people, Person{Annotator: a, Budget: max(budget, s.cfg.MinLabels)})
	if s.clock != nil {
		s.clock = append(s.clock, s.roundStart().Add(a.offset))
	}
	return n
}

// People returns every person who has arrived so far, in order of arrival.
func (s *Stream) People() []Person { return slices.Clone(s.people) }

// Types returns each person's true type by ID.
func (s *Stream) Types() map[string]Type {
	m := make(map[string]Type, len(s.people))
	for _, p := range s.people {
		m[p.ID] = p.Type
	}
	return m
}

// Confusion returns person i's confusion matrix for the codebook, entry
// [t][l] the probability of answering l for an item perceived as t, shared
// confusions included (see Crowd.Confusion for how the rest is drawn).
func (s *Stream) Confusion(cb handoff.Codebook, i int) [][]float64 {
	k := len(cb.Classes)
	m := s.confusion(&cb, i)
	out := make([][]float64, k)
	for t := range out {
		out[t] = slices.Clone(m[t*k : (t+1)*k])
	}
	return out
}

func (s *Stream) confusion(cb *handoff.Codebook, i int) []float64 {
	sig := signature(cb)
	ms := s.conf[sig]
	for len(ms) <= i {
		j := len(ms)
		p := s.people[j]
		r := newRand(s.seed, 0xc0f5, uint64(j), hashString(sig))
		m := personConfusion(r, p.Type, p.OneClass, p.Accuracy, len(cb.Classes), cb.IsOrdinal())
		if p.Type != Careful && p.Type != Spammer {
			k := len(cb.Classes)
			for _, sh := range s.cfg.Shared {
				f, ok1 := cb.Index(sh.From)
				t, ok2 := cb.Index(sh.To)
				if !ok1 || !ok2 {
					continue
				}
				row := m[f*k : (f+1)*k]
				for c := range row {
					row[c] *= 1 - sh.Rate
				}
				row[t] += sh.Rate
			}
		}
		ms = append(ms, m)
	}
	s.conf[sig] = ms
	return ms[i]
}

func (s *Stream) roundStart() time.Time {
	return s.cfg.Start.Add(time.Duration(max(s.round, 0)) * s.cfg.RoundGap)
}

// Answer has the crowd label tasks in round round ≥ 0, as Crowd.Answer
// does: each task gets labels from labelsPerItem active people who have not
// labelled it before (people arrive as needed), a resubmitter may add 5–9
// copies, the item's perceived class comes from bias and Ambiguity as for
// Crowd.Answer, and the answer from the person's confusion row. A person who
// has given their budget leaves and a new person arrives. Shared
// confusions name classes of cb; a class the codebook lacks is an error.
func (s *Stream) Answer(cb handoff.Codebook, bias Bias, tasks []Task, labelsPerItem, round int) ([]handoff.Label, error) {
	if err := cb.Validate(); err != nil {
		return nil, fmt.Errorf("sim: answer: codebook: %w", err)
	}
	if labelsPerItem < 1 || round < 0 {
		return nil, fmt.Errorf("sim: answer: labels per item = %d and round = %d, need ≥ 1 and ≥ 0", labelsPerItem, round)
	}
	k := len(cb.Classes)
	if err := bias.check(k); err != nil {
		return nil, err
	}
	for i, sh := range s.cfg.Shared {
		if _, ok := cb.Index(sh.From); !ok {
			return nil, fmt.Errorf("sim: answer: shared[%d]: class %q is not in the codebook", i, sh.From)
		}
		if _, ok := cb.Index(sh.To); !ok {
			return nil, fmt.Errorf("sim: answer: shared[%d]: class %q is not in the codebook", i, sh.To)
		}
	}
	if round != s.round || s.clock == nil {
		s.round = round
		s.clock = make([]time.Time, len(s.people))
		for i, p := range s.people {
			s.clock[i] = s.roundStart().Add(p.offset)
		}
	}
	s.calls++
	r := newRand(s.seed, 0xa5e4, uint64(round), s.calls)
	labels := make([]handoff.Label, 0, len(tasks)*labelsPerItem)
	for ti, t := range tasks {
		truth, ok := cb.Index(t.Truth)
		if !ok {
			return nil, fmt.Errorf("sim: answer: tasks[%d] (%s): truth %q is not a codebook class", ti, t.Item, t.Truth)
		}
		alt := -1
		if t.Alt != "" {
			if alt, ok = cb.Index(t.Alt); !ok {
				return nil, fmt.Errorf("sim: answer: tasks[%d] (%s): alt %q is not a codebook class", ti, t.Item, t.Alt)
			}
		}
		if !(t.Ambiguity >= 0 && t.Ambiguity <= 1) {
			return nil, fmt.Errorf("sim: answer: tasks[%d] (%s): ambiguity %v outside [0, 1]", ti, t.Item, t.Ambiguity)
		}
		perceived := truth
		if rows, ok := bias[t.Stratum]; ok {
			perceived = categorical(newRand(s.seed, 0x9e4c, hashString(t.Item)), rows[truth])
		}
		for _, who := range s.pick(r, t.Item, labelsPerItem) {
			p := &s.people[who]
			copies := 1
			if p.Type == Resubmitter && r.Float64() < s.cfg.Resubmit {
				copies = 6 + r.IntN(5)
			}
			conf := s.confusion(&cb, who)
			for range copies {
				q := perceived
				if alt >= 0 && r.Float64() < t.Ambiguity {
					q = alt
				}
				class := categorical(r, conf[q*k:(q+1)*k])
				secs := math.Round(math.Max(0.3, lognormal(r, p.Seconds, 0.35))*10) / 10
				at := s.clock[who]
				s.clock[who] = at.Add(time.Duration((secs + lognormal(r, 3, 0.5)) * float64(time.Second))).Truncate(time.Millisecond)
				labels = append(labels, handoff.Label{Item: t.Item, Annotator: p.ID, Class: cb.Classes[class].Key, Time: at, Seconds: secs})
				p.Given++
			}
			if p.Given >= p.Budget {
				s.leave(who)
			}
		}
	}
	return labels, nil
}

// pick returns need distinct people for the item among the active ones who
// have not labelled it, drawing new arrivals when too few are free.
func (s *Stream) pick(r *rand.Rand, item string, need int) []int {
	done := s.on[item]
	var free []int
	for _, a := range s.active {
		if !slices.Contains(done, a) {
			free = append(free, a)
		}
	}
	r.Shuffle(len(free), func(i, j int) { free[i], free[j] = free[j], free[i] })
	for len(free) < need {
		n := s.arrive()
		s.active = append(s.active, n)
		free = append(free, n)
	}
	out := free[:need]
	s.on[item] = append(done, out...)
	return out
}

// leave replaces a person whose budget is spent by a new arrival, keeping
// Active people at work (more while extra arrivals from pick remain).
func (s *Stream) leave(who int) {
	i := slices.Index(s.active, who)
	if i < 0 {
		return
	}
	s.active = slices.Delete(s.active, i, i+1)
	if len(s.active) < s.cfg.Active {
		s.active = append(s.active, s.arrive())
	}
}

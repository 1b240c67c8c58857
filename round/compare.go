package round

import (
	"fmt"
	"slices"
	"sort"
	"strings"

	"gonum.org/v1/gonum/floats"

	"handoff"
	"handoff/compare"
	"handoff/store"
)

// CompareConfig says what Compare compares.
type CompareConfig struct {
	// Reference names the one reference coding to compare with ("" for
	// every reference the project has).
	Reference string
	// Waves lists the crowd waves to compare with each other, pair by pair
	// (nil means every wave that has labels; one wave means none).
	Waves []int
	// Options are the bootstrap and the minimum sizes; a zero seed takes
	// the project's seed.
	Options compare.Options
}

// Compare compares the project's codings with each other: the crowd's
// consensus against each reference coding (validity), the machine against
// each reference coding, and each crowd wave's consensus against the
// others' (test–retest). The consensus is computed, in memory, with the
// project's consensus settings: over all labels for the crowd, over the
// labels of one wave for a wave. Items whose consensus is a gold answer are
// left out of every comparison (the gold answer is an expert's, not the
// crowd's), as are items without labels. The machine's classes are the
// latest round's scores: out-of-fold probabilities on its training items,
// so no item is judged by a model that was fit on its consensus.
//
// At the item level both sides' classes are compared on the items both
// coded. At the parent level, for a reference of item labels and for
// waves, each side is rolled up over the items both coded (so the two
// roll-ups rest on the same items); for a reference of parent scores, the
// crowd's (the machine's) roll-up over all of the parent's coded items is
// set against the score. Measures: the share of each class, and for an
// ordinal codebook also the mean position (1 = the lowest class).
//
// References never change anything: Compare writes nothing.
func Compare(st *store.Store, cfg CompareConfig) (*compare.Report, error) {
	sn, err := st.Snapshot(store.SnapshotOptions{Times: true, Waves: true})
	if err != nil {
		return nil, err
	}
	refs, err := st.References()
	if err != nil {
		return nil, err
	}
	return compareSnapshot(sn, refs, cfg)
}

func compareSnapshot(sn *store.Snapshot, refs []handoff.Reference, cfg CompareConfig) (*compare.Report, error) {
	p, err := projectOf(sn)
	if err != nil {
		return nil, err
	}
	stored, err := storedKeys(sn.State[settingsState])
	if err != nil {
		return nil, err
	}
	pc, _, err := configFrom(stored, nil)
	if err != nil {
		return nil, err
	}
	opt := cfg.Options
	if opt.Bootstrap.Seed == 0 {
		opt.Bootstrap.Seed = pc.Seed
	}
	if cfg.Reference != "" {
		i := slices.IndexFunc(refs, func(r handoff.Reference) bool { return r.Name == cfg.Reference })
		if i < 0 {
			names := make([]string, len(refs))
			for j, r := range refs {
				names[j] = r.Name
			}
			if len(names) == 0 {
				return nil, fmt.Errorf("%w: the project has no reference coding named %q (none yet; add one with `loop reference add`)", store.ErrNotFound, cfg.Reference)
			}
			return nil, fmt.Errorf("%w: the project has no reference coding named %q (references: %s)", store.ErrNotFound, cfg.Reference, strings.Join(names, ", "))
		}
		refs = refs[i : i+1]
	}
	waves := wavesOf(sn.Labels.Wave)
	if cfg.Waves != nil {
		for _, w := range cfg.Waves {
			if !slices.Contains(waves, w) {
				return nil, fmt.Errorf("%w: wave %d has no labels (waves with labels: %s)", ErrNothing, w, joinInts(waves))
			}
		}
		waves = slices.Clone(cfg.Waves)
		slices.Sort(waves)
		waves = slices.Compact(waves)
	}
	c := &comparer{p: p, cfg: pc.Consensus, opt: opt, K: len(p.cb.Classes), ordinal: p.cb.IsOrdinal()}
	c.parentOf, c.parents = parentIndex(p.items)
	rep := &compare.Report{Classes: p.cb.Keys(), Ordinal: c.ordinal, Options: opt}
	if len(refs) == 0 && len(waves) < 2 {
		rep.Notes = append(rep.Notes, "nothing to compare yet: the project has no reference coding (add one with `loop reference add DIR FILE --name NAME`) and one crowd wave (add a second with `loop labels add DIR FILE --wave 2`)")
		return rep, nil
	}
	if len(refs) > 0 {
		crowdName := "crowd consensus"
		if len(wavesOf(sn.Labels.Wave)) > 1 {
			crowdName = "crowd consensus (all waves)"
		}
		cr, err := consensus(p, pc.Consensus)
		if err != nil {
			return nil, err
		}
		crowdCls, _ := c.crowdClasses(cr)
		machineCls, machineName, machineNote := c.machineClasses(sn)
		for _, ref := range refs {
			cmp := c.againstReference(ref, crowdCls, "reference", crowdName)
			if gold := c.goldIn(ref); gold > 0 {
				cmp.Notes = append(cmp.Notes, fmt.Sprintf("%d gold items left out: their consensus is the gold answer, not the crowd's", gold))
			}
			rep.Comparisons = append(rep.Comparisons, cmp)
			if machineCls == nil {
				rep.Comparisons = append(rep.Comparisons, compare.Comparison{Kind: "machine", A: "machine", B: ref.Name,
					ItemsNote: "no estimate yet: " + machineNote, ParentsNote: "no estimate yet: " + machineNote})
				continue
			}
			mc := c.againstReference(ref, machineCls, "machine", machineName)
			mc.Notes = append(mc.Notes, machineNote)
			rep.Comparisons = append(rep.Comparisons, mc)
		}
	}
	for i := 0; i < len(waves); i++ {
		for j := i + 1; j < len(waves); j++ {
			cmp, err := c.betweenWaves(sn.Labels.Wave, waves[i], waves[j])
			if err != nil {
				return nil, err
			}
			rep.Comparisons = append(rep.Comparisons, cmp)
		}
	}
	return rep, nil
}

// comparer holds what every comparison of one project shares.
type comparer struct {
	p        *project
	cfg      ConsensusConfig
	opt      compare.Options
	K        int
	ordinal  bool
	parentOf []int    // item position → parent index (−1: none)
	parents  []string // parent index → name, sorted
}

func parentIndex(items []handoff.Item) ([]int, []string) {
	seen := map[string]bool{}
	var names []string
	for _, it := range items {
		if it.Parent != "" && !seen[it.Parent] {
			seen[it.Parent] = true
			names = append(names, it.Parent)
		}
	}
	sort.Strings(names)
	ix := make(map[string]int, len(names))
	for g, n := range names {
		ix[n] = g
	}
	of := make([]int, len(items))
	for i, it := range items {
		of[i] = -1
		if it.Parent != "" {
			of[i] = ix[it.Parent]
		}
	}
	return of, names
}

// crowdClasses returns the consensus class per item position (−1 for items
// without labels and for gold items) and the number of gold items left
// out.
func (c *comparer) crowdClasses(cr *consensusResult) ([]int, int) {
	cls := make([]int, len(c.p.items))
	gold := 0
	for i := range cls {
		cls[i] = -1
		switch {
		case c.p.gold[i] >= 0:
			if cr.nlabels[i] > 0 {
				gold++
			}
		case cr.nlabels[i] > 0:
			cls[i] = floats.MaxIdx(cr.posterior[i*c.K : (i+1)*c.K])
		}
	}
	return cls, gold
}

// machineClasses returns the latest round's predicted class per item
// position (−1 where it scored none), the machine's name and a note; nil
// classes when there is no round with scores (the note says why).
func (c *comparer) machineClasses(sn *store.Snapshot) ([]int, string, string) {
	sc, err := decodeScores(sn.State[scoresState])
	if err != nil {
		return nil, "", err.Error()
	}
	if sc == nil {
		return nil, "", "no round has scored the items yet; run `loop round DIR`"
	}
	cls := make([]int, len(c.p.items))
	for i := range cls {
		cls[i] = -1
		if r := sc.row(i); r != nil && len(r) == c.K {
			cls[i] = floats.MaxIdx(r)
		}
	}
	return cls, fmt.Sprintf("machine (round %d)", sc.Round),
		fmt.Sprintf("machine classes: round %d's scores with model %s, out-of-fold on its training items", sc.Round, sc.Model)
}

// againstReference compares a side's classes (per item position) with a
// reference coding.
func (c *comparer) againstReference(ref handoff.Reference, side []int, kind, name string) compare.Comparison {
	cmp := compare.Comparison{Kind: kind, A: name, B: ref.Name}
	if ref.Kind() == handoff.ReferenceItems {
		rc := make([]int, len(c.p.items))
		for i := range rc {
			rc[i] = -1
		}
		missing := 0
		for _, l := range ref.Items {
			i, ok := c.p.index[l.Item]
			k, ok2 := c.p.cb.Index(l.Class)
			if !ok || !ok2 {
				missing++
				continue
			}
			rc[i] = k
		}
		if missing > 0 {
			cmp.Notes = append(cmp.Notes, fmt.Sprintf("%d reference rows name items or classes the project no longer has; left out", missing))
		}
		c.itemsAndParents(&cmp, side, rc)
		return cmp
	}
	cmp.ItemsNote = "the reference scores parents, not items"
	byQ := map[string][]handoff.ReferenceScore{}
	var qs []string
	scored := map[string]bool{}
	for _, s := range ref.Parents {
		scored[s.Parent] = true
		q := s.Question
		if q == "" {
			q = handoff.PositionQuestion
		}
		if _, ok := byQ[q]; !ok {
			qs = append(qs, q)
		}
		byQ[q] = append(byQ[q], s)
	}
	sort.Slice(qs, func(a, b int) bool { return c.measureOrder(qs[a]) < c.measureOrder(qs[b]) })
	counts := compare.Rollup(side, c.parentOf, len(c.parents), c.K)
	pix := make(map[string]int, len(c.parents))
	for g, n := range c.parents {
		pix[n] = g
	}
	left := 0
	for _, q := range qs {
		var names []string
		var x, y []float64
		for _, s := range byQ[q] {
			g, ok := pix[s.Parent]
			if !ok {
				left++
				continue
			}
			v, ok := c.measure(counts[g], q)
			if !ok {
				left++
				continue
			}
			names, x, y = append(names, s.Parent), append(x, v), append(y, s.Value)
		}
		lo, hi, _ := handoff.ScoreRange(c.p.cb, q)
		cmp.Parents = append(cmp.Parents, compare.CompareParents(q, handoff.ScoreLabel(c.p.cb, q), lo, hi, names, x, y, c.opt))
	}
	if left > 0 {
		cmp.Notes = append(cmp.Notes, fmt.Sprintf("%d parent scores left out: %s has coded none of the parent's items", left, name))
	}
	codedN, allN := 0, 0
	for i, g := range c.parentOf {
		if g >= 0 && scored[c.parents[g]] {
			allN++
			if side[i] >= 0 {
				codedN++
			}
		}
	}
	cmp.Notes = append(cmp.Notes, fmt.Sprintf("%s rolls each parent up over the items it coded: %d of the %d items of the scored parents", name, codedN, allN))
	return cmp
}

// measureOrder sorts measures: the position first, then the classes in
// codebook order.
func (c *comparer) measureOrder(q string) int {
	if q == handoff.PositionQuestion {
		return -1
	}
	k, _ := c.p.cb.Index(q)
	return k
}

// measure is a parent's value of measure q from its class counts.
func (c *comparer) measure(counts []int, q string) (float64, bool) {
	if q == handoff.PositionQuestion {
		return compare.Position(counts)
	}
	k, ok := c.p.cb.Index(q)
	if !ok {
		return 0, false
	}
	return compare.Share(counts, k)
}

// measures are the parent-level measures of item codings: the mean
// position (ordinal codebooks) and each class's share.
func (c *comparer) measures() []string {
	var ms []string
	if c.ordinal {
		ms = append(ms, handoff.PositionQuestion)
	}
	return append(ms, c.p.cb.Keys()...)
}

// itemsAndParents fills an item-level comparison of a and b (classes per
// item position) and the parent-level one over the items both coded.
func (c *comparer) itemsAndParents(cmp *compare.Comparison, a, b []int) {
	m := compare.Nominal
	if c.ordinal {
		m = compare.Ordinal
	}
	cmp.Items = compare.CompareItems(a, b, c.K, m, c.opt)
	both := func(side []int) []int {
		out := make([]int, len(side))
		for i := range side {
			out[i] = -1
			if a[i] >= 0 && b[i] >= 0 {
				out[i] = side[i]
			}
		}
		return out
	}
	ca := compare.Rollup(both(a), c.parentOf, len(c.parents), c.K)
	cb := compare.Rollup(both(b), c.parentOf, len(c.parents), c.K)
	var used []int
	for g := range c.parents {
		if _, ok := compare.Position(ca[g]); ok {
			used = append(used, g)
		}
	}
	if len(used) == 0 {
		if len(c.parents) == 0 {
			cmp.ParentsNote = "no item has a parent"
		} else {
			cmp.ParentsNote = "no estimate yet: no parent has an item coded by both"
		}
		return
	}
	for _, q := range c.measures() {
		names := make([]string, len(used))
		x, y := make([]float64, len(used)), make([]float64, len(used))
		for j, g := range used {
			names[j] = c.parents[g]
			x[j], _ = c.measure(ca[g], q)
			y[j], _ = c.measure(cb[g], q)
		}
		lo, hi, _ := handoff.ScoreRange(c.p.cb, q)
		cmp.Parents = append(cmp.Parents, compare.CompareParents(q, handoff.ScoreLabel(c.p.cb, q), lo, hi, names, x, y, c.opt))
	}
}

// betweenWaves compares the consensus of wave a with that of wave b, each
// computed from that wave's labels alone with the project's settings.
func (c *comparer) betweenWaves(waveOf []uint16, a, b int) (compare.Comparison, error) {
	cmp := compare.Comparison{Kind: "waves", A: fmt.Sprintf("wave %d", a), B: fmt.Sprintf("wave %d", b)}
	var cls [2][]int
	for s, w := range []int{a, b} {
		pw := c.p.onlyWave(waveOf, uint16(w))
		cr, err := consensus(pw, c.cfg)
		if err != nil {
			return cmp, fmt.Errorf("consensus of wave %d: %w", w, err)
		}
		cls[s], _ = c.crowdClasses(cr)
	}
	gold := 0
	for _, i := range c.labelledIn(waveOf, uint16(a), uint16(b)) {
		if c.p.gold[i] >= 0 {
			gold++
		}
	}
	if gold > 0 {
		cmp.Notes = append(cmp.Notes, fmt.Sprintf("%d gold items labelled in both waves left out: their consensus is the gold answer in every wave", gold))
	}
	c.itemsAndParents(&cmp, cls[0], cls[1])
	return cmp, nil
}

// onlyWave returns the project with the labels of one wave only (waveOf
// is every label's wave, as the label table's columns).
func (p *project) onlyWave(waveOf []uint16, w uint16) *project {
	l := p.labels
	out := l.Subset(func(j int) bool { return waveOf[j] == w })
	q := *p
	q.labels = out
	return &q
}

// wavesOf lists the waves that have labels, in order.
func wavesOf(w []uint16) []int {
	seen := map[uint16]bool{}
	var out []int
	for _, x := range w {
		if !seen[x] {
			seen[x] = true
			out = append(out, int(x))
		}
	}
	sort.Ints(out)
	return out
}

func joinInts(xs []int) string {
	if len(xs) == 0 {
		return "none"
	}
	s := make([]string, len(xs))
	for i, x := range xs {
		s[i] = fmt.Sprint(x)
	}
	return strings.Join(s, ", ")
}

// goldIn counts the gold items a reference codes (item labels) or that
// belong to the parents it scores.
func (c *comparer) goldIn(ref handoff.Reference) int {
	n := 0
	if ref.Kind() == handoff.ReferenceItems {
		for _, l := range ref.Items {
			if i, ok := c.p.index[l.Item]; ok && c.p.gold[i] >= 0 {
				n++
			}
		}
		return n
	}
	scored := map[string]bool{}
	for _, s := range ref.Parents {
		scored[s.Parent] = true
	}
	for i, it := range c.p.items {
		if c.p.gold[i] >= 0 && scored[it.Parent] {
			n++
		}
	}
	return n
}

// labelledIn returns the item positions with labels in both waves a and b.
func (c *comparer) labelledIn(waveOf []uint16, a, b uint16) []int {
	in := make([]uint8, len(c.p.items))
	for j, i := range c.p.labels.Item {
		switch waveOf[j] {
		case a:
			in[i] |= 1
		case b:
			in[i] |= 2
		}
	}
	var out []int
	for i, v := range in {
		if v == 3 {
			out = append(out, i)
		}
	}
	return out
}

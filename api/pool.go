package api

import (
	crand "crypto/rand"
	"crypto/sha256"
	"encoding/base64"
	"encoding/json"
	"errors"
	"fmt"
	"math/rand/v2"
	"sort"
	"sync"
	"time"

	"handoff/store"
)

// pool decides which item each person gets next. It keeps, in memory, every
// item's number of labels and live leases; the store keeps the labels and
// the leases themselves, so a restarted server rebuilds the same pool.
//
// Hand-out order: the items of the latest next batch first (in the batch's
// order), then every other item in the order it was added. Gold items are
// kept for the practice and the check and are not handed out as work.
//
// Targets: every item wants Config.Redundancy labels; an item of the latest
// next batch wants one label more than it had when the service first saw
// that batch (at least Config.Redundancy). That target is stored with the
// batch (store.PutServiceTargets), so restarts, imports and rebuilds after
// a round never raise it again; only a new next batch does, once. No item
// is handed out when its labels and live leases reach its target.
type pool struct {
	st  *store.Store
	cfg Config
	m   *metrics

	mu      sync.Mutex
	ids     []string          // item number → id
	num     map[string]uint32 // id → item number
	count   []int32           // labels per item
	leased  []int32           // live leases per item
	target  []int32           // labels wanted per item
	order   []uint32          // work items in hand-out order
	head    int               // order[:head] have all their labels
	open    int               // work items with fewer labels than wanted
	seqBase uint64            // labels numbered below this are counted
	seq     uint64            // lease ids start with it: time-ordered keys in the store
	rnd     *rand.ChaCha8     // the random part of lease ids (seeded from crypto/rand)
	anns    map[string]*annState
	leases  map[string]*lease // live leases by id
	stale   map[string]*lease // expired leases, kept an hour so that late answers are told so
}

type annState struct {
	done    map[uint32]struct{} // items labelled (nil: not loaded yet)
	skipped map[uint32]struct{}
	perDay  map[string]int // own labels by UTC day (YYYY-MM-DD)
	from    int            // order[:from] are done, skipped or full for this person
	lease   *lease
}

type lease struct {
	id      string
	item    uint32
	ann     string
	expires time.Time
}

func newPool(st *store.Store, cfg Config, m *metrics) (*pool, error) {
	var seed [32]byte
	if _, err := crand.Read(seed[:]); err != nil {
		return nil, err
	}
	p := &pool{st: st, cfg: cfg, m: m, seq: uint64(time.Now().UnixNano()), anns: map[string]*annState{},
		leases: map[string]*lease{}, stale: map[string]*lease{}, rnd: rand.NewChaCha8(seed)}
	if err := p.rebuild(); err != nil {
		return nil, err
	}
	stored, err := st.ServiceLeases()
	if err != nil {
		return nil, err
	}
	now := cfg.Now()
	var old []string
	p.mu.Lock()
	for _, sl := range stored {
		n, ok := p.num[sl.Item]
		if !ok || now.After(sl.Expires.Add(time.Hour)) {
			old = append(old, sl.ID)
			continue
		}
		l := &lease{id: sl.ID, item: n, ann: sl.Annotator, expires: sl.Expires}
		if !now.Before(sl.Expires) {
			p.stale[sl.ID] = l
			continue
		}
		a := p.ann(sl.Annotator)
		if err := p.loadDone(sl.Annotator, a); err != nil {
			p.mu.Unlock()
			return nil, err
		}
		if _, done := a.done[n]; done {
			// Answered: the label's transaction ended the lease before
			// the write that stored the lease landed.
			old = append(old, sl.ID)
			continue
		}
		if a.lease != nil { // keep the later one
			if a.lease.expires.After(sl.Expires) {
				old = append(old, sl.ID)
				continue
			}
			old = append(old, a.lease.id)
			p.dropLease(a.lease)
		}
		p.leases[l.id] = l
		p.leased[n]++
		a.lease = l
	}
	p.m.liveLeases.Set(float64(len(p.leases)))
	p.mu.Unlock()
	if len(old) > 0 {
		if err := st.EndLeases(old); err != nil {
			return nil, err
		}
	}
	return p, nil
}

// selectionItems reads the item ids of the latest stored next batch, in
// order, and a key naming that batch (its round and a digest of its
// record). It understands a JSON list of objects with an "item" (or "id")
// field, or an object holding such a list under "items" or "batch".
func selectionItems(st *store.Store) (key string, ids []string, err error) {
	sels, err := st.Selections()
	if err != nil || len(sels) == 0 {
		return "", nil, err
	}
	last := sels[len(sels)-1]
	sum := sha256.Sum256(last.Data)
	ids, err = parseSelection(last.Data)
	return fmt.Sprintf("round %d %x", last.N, sum[:12]), ids, err
}

// batchTargets returns the label targets of the latest next batch's items:
// stored ones if the service has seen this batch before, otherwise one more
// than each item's labels now (at least Config.Redundancy), which it stores.
func (p *pool) batchTargets(key string, sel []string, num map[string]uint32, isGold map[uint32]bool, count []int32) (map[string]int32, error) {
	if b, err := p.st.ServiceTargets(key); err == nil {
		var t map[string]int32
		if err := json.Unmarshal(b, &t); err == nil {
			return t, nil
		}
		p.cfg.Logf("the stored targets of the next batch (%s) are damaged: setting them again", key)
	} else if !errors.Is(err, store.ErrNotFound) {
		return nil, err
	}
	t := make(map[string]int32, len(sel))
	for _, id := range sel {
		if n, ok := num[id]; ok && !isGold[n] {
			t[id] = max(int32(p.cfg.Redundancy), count[n]+1)
		}
	}
	b, err := json.Marshal(t)
	if err != nil {
		return nil, err
	}
	if err := p.st.PutServiceTargets(key, b); err != nil {
		return nil, err
	}
	return t, nil
}

func parseSelection(b []byte) ([]string, error) {
	type entry struct {
		Item string `json:"item"`
		ID   string `json:"id"`
	}
	var list []entry
	if err := json.Unmarshal(b, &list); err != nil {
		var obj struct {
			Items []entry `json:"items"`
			Batch []entry `json:"batch"`
		}
		if err2 := json.Unmarshal(b, &obj); err2 != nil {
			return nil, fmt.Errorf("reading the latest next batch: %w", err)
		}
		list = append(obj.Items, obj.Batch...)
	}
	out := make([]string, 0, len(list))
	for _, e := range list {
		if e.Item != "" {
			out = append(out, e.Item)
		} else if e.ID != "" {
			out = append(out, e.ID)
		}
	}
	return out, nil
}

// rebuild reads items, label counts, gold and the latest next batch from
// the store and recomputes the pool, keeping live leases and skips. Labels
// recorded while it runs are counted once: rebuild counts labels numbered
// below the store's label sequence at the time it read them, record counts
// the rest.
func (p *pool) rebuild() error {
	// The lock is held while reading, so that a label committed after the
	// read is recorded (by record, which waits) against the new counts.
	p.mu.Lock()
	defer p.mu.Unlock()
	ids, err := p.st.ItemIDs()
	if err != nil {
		return err
	}
	count := make([]int32, len(ids))
	var seq uint64
	if err := p.st.EachLabel(func(r *store.LabelRecord) error {
		if int(r.Item) < len(count) {
			count[r.Item]++
		}
		seq = r.N + 1
		return nil
	}); err != nil {
		return err
	}
	gold, err := p.st.Gold()
	if err != nil {
		return err
	}
	selKey, sel, err := selectionItems(p.st)
	if err != nil {
		p.cfg.Logf("ignoring the latest next batch: %v", err)
		sel = nil
	}
	num := make(map[string]uint32, len(ids))
	for i, id := range ids {
		num[id] = uint32(i)
	}
	isGold := make(map[uint32]bool, len(gold))
	for _, g := range gold {
		if n, ok := num[g.Item]; ok {
			isGold[n] = true
		}
	}
	target := make([]int32, len(ids))
	for i := range target {
		target[i] = int32(p.cfg.Redundancy)
	}
	var batch map[string]int32
	if len(sel) > 0 {
		if batch, err = p.batchTargets(selKey, sel, num, isGold, count); err != nil {
			return err
		}
	}
	order := make([]uint32, 0, len(ids))
	inOrder := make(map[uint32]bool, len(sel))
	for _, id := range sel {
		n, ok := num[id]
		if !ok || isGold[n] || inOrder[n] {
			continue
		}
		inOrder[n] = true
		order = append(order, n)
		target[n] = max(target[n], batch[id])
	}
	for i := range ids {
		n := uint32(i)
		if !inOrder[n] && !isGold[n] && ids[i] != "" {
			order = append(order, n)
		}
	}
	open := 0
	for _, n := range order {
		if count[n] < target[n] {
			open++
		}
	}

	p.ids, p.num, p.count, p.target, p.order, p.open, p.head = ids, num, count, target, order, open, 0
	// Labels are numbered in commit order, so those EachLabel did not see
	// have numbers ≥ seq.
	p.seqBase = seq
	p.leased = make([]int32, len(ids))
	for _, l := range p.leases {
		if int(l.item) < len(p.leased) {
			p.leased[l.item]++
		}
	}
	for _, a := range p.anns {
		a.done, a.perDay, a.from = nil, nil, 0
	}
	p.m.openItems.Set(float64(open))
	return nil
}

// ann returns a person's state, creating it. Call with p.mu held.
func (p *pool) ann(id string) *annState {
	a, ok := p.anns[id]
	if !ok {
		a = &annState{skipped: map[uint32]struct{}{}}
		p.anns[id] = a
	}
	return a
}

// loadDone reads which items a person has labelled, once. Call with p.mu
// held.
func (p *pool) loadDone(id string, a *annState) error {
	if a.done != nil {
		return nil
	}
	labels, err := p.st.LabelsBy(id)
	if err != nil && !errors.Is(err, store.ErrNotFound) {
		return err
	}
	a.done = make(map[uint32]struct{}, len(labels))
	a.perDay = map[string]int{}
	for _, l := range labels {
		if n, ok := p.num[l.Item]; ok {
			a.done[n] = struct{}{}
		}
		if !l.Time.IsZero() {
			a.perDay[l.Time.UTC().Format(time.DateOnly)]++
		}
	}
	return nil
}

// dropLease forgets a live lease (answered, skipped or expired). Call with
// p.mu held.
func (p *pool) dropLease(l *lease) {
	if _, ok := p.leases[l.id]; !ok {
		return
	}
	delete(p.leases, l.id)
	if int(l.item) < len(p.leased) {
		p.leased[l.item]--
	}
	if a, ok := p.anns[l.ann]; ok && a.lease == l {
		a.lease = nil
	}
	p.m.liveLeases.Set(float64(len(p.leases)))
}

// Grant is the result of next.
type grant struct {
	lease   *lease
	itemID  string
	renewed bool // the person's existing live lease was returned
}

// next picks the next item for a person and reserves it under a new lease,
// or returns their live lease again. It returns a zero grant when nothing is
// left for them. The caller must store the new lease (then call confirm) or
// give it back (cancel).
func (p *pool) next(person string, now time.Time) (grant, error) {
	p.mu.Lock()
	defer p.mu.Unlock()
	a := p.ann(person)
	if err := p.loadDone(person, a); err != nil {
		return grant{}, err
	}
	if a.lease != nil {
		if now.Before(a.lease.expires) {
			return grant{lease: a.lease, itemID: p.ids[a.lease.item], renewed: true}, nil
		}
		p.expireOne(a.lease)
	}
	for p.head < len(p.order) {
		n := p.order[p.head]
		if p.count[n] < p.target[n] {
			break
		}
		p.head++
	}
	a.from = max(a.from, p.head)
	advancing := true
	for i := a.from; i < len(p.order); i++ {
		n := p.order[i]
		taken := p.count[n]+p.leased[n] >= p.target[n]
		if taken && !advancing && p.count[n] < p.target[n] {
			// In others' hands, past this person's frontier: nothing to
			// note, so skip the map lookups below (most of the scan).
			continue
		}
		_, done := a.done[n]
		_, skipped := a.skipped[n]
		full := p.count[n] >= p.target[n]
		if done || skipped || full {
			if advancing {
				a.from = i + 1
			}
			continue
		}
		advancing = false
		if taken {
			continue
		}
		p.seq++
		l := &lease{id: p.leaseID(), item: n, ann: person, expires: now.Add(p.cfg.LeaseTime)}
		p.leases[l.id] = l
		p.leased[n]++
		a.lease = l
		p.m.liveLeases.Set(float64(len(p.leases)))
		return grant{lease: l, itemID: p.ids[n]}, nil
	}
	return grant{}, nil
}

// leaseID returns a new lease id: p.seq in 16 hex digits, then 6 random
// bytes in unpadded base64url (from a ChaCha8 stream seeded by crypto/rand,
// so that ids stay unguessable without a system call per lease). Call with
// p.mu held, after p.seq++.
func (p *pool) leaseID() string {
	var b [16 + 8]byte
	const hex = "0123456789abcdef"
	for i := range 16 {
		b[15-i] = hex[(p.seq>>(4*i))&15]
	}
	var r [6]byte
	p.rnd.Read(r[:])
	base64.RawURLEncoding.Encode(b[16:], r[:])
	return string(b[:])
}

// cancel gives back a lease that could not be stored.
func (p *pool) cancel(l *lease) {
	p.mu.Lock()
	p.dropLease(l)
	p.mu.Unlock()
}

// expireOne ends a lease that ran out; the stored copy is forgotten an hour
// later. Call with p.mu held.
func (p *pool) expireOne(l *lease) {
	p.dropLease(l)
	p.stale[l.id] = l
	p.m.leases.WithLabelValues("expired").Inc()
}

// expire ends the leases that have run out by now and returns the ids of
// stored leases old enough to forget.
func (p *pool) expire(now time.Time) []string {
	p.mu.Lock()
	defer p.mu.Unlock()
	for _, l := range p.leases {
		if !now.Before(l.expires) {
			p.expireOne(l)
		}
	}
	var old []string
	for id, l := range p.stale {
		if now.After(l.expires.Add(time.Hour)) {
			old = append(old, id)
			delete(p.stale, id)
		}
	}
	sort.Strings(old)
	return old
}

// Lease problems found by checkLease.
var (
	errLeaseUnknown  = errors.New("no such lease: fetch the next item again")
	errLeaseExpired  = errors.New("the lease has expired: fetch the next item again")
	errLeaseMismatch = errors.New("the lease was given for another item or person")
)

// checkLease checks that person holds a live lease id on item at now. The
// pool knows every live lease (those of earlier runs are loaded from the
// store at start) and, for an hour, the expired ones.
func (p *pool) checkLease(person, id, item string, now time.Time) error {
	p.mu.Lock()
	defer p.mu.Unlock()
	l, live := p.leases[id]
	if !live {
		l = p.stale[id]
	}
	switch {
	case l == nil:
		return fmt.Errorf("lease %q: %w", id, errLeaseUnknown)
	case l.ann != person || p.ids[l.item] != item:
		return fmt.Errorf("lease %q: %w", id, errLeaseMismatch)
	case !live || !now.Before(l.expires):
		if live {
			p.expireOne(l)
		}
		return fmt.Errorf("lease %q expired at %s: %w", id, l.expires.UTC().Format(time.RFC3339), errLeaseExpired)
	}
	return nil
}

// record counts a stored label (number n) by person on item, ending the
// lease it was given under.
func (p *pool) record(person, item, leaseID string, n uint64, when time.Time) {
	p.mu.Lock()
	defer p.mu.Unlock()
	it, ok := p.num[item]
	if !ok {
		return
	}
	if l, ok := p.leases[leaseID]; ok && l.ann == person {
		p.dropLease(l)
		p.m.leases.WithLabelValues("answered").Inc()
	}
	a := p.ann(person)
	if n >= p.seqBase {
		p.count[it]++
		if p.count[it] == p.target[it] {
			p.open--
			p.m.openItems.Set(float64(p.open))
		}
		if a.done != nil {
			a.done[it] = struct{}{}
			a.perDay[when.UTC().Format(time.DateOnly)]++
		}
	} else if a.done != nil {
		a.done[it] = struct{}{}
	}
}

// drop ends a person's lease without a label: skipped (the item is not
// offered to them again while the server runs) or refused.
func (p *pool) drop(person, leaseID string, skip bool) (item string, ok bool) {
	p.mu.Lock()
	defer p.mu.Unlock()
	l, ok := p.leases[leaseID]
	if !ok || l.ann != person {
		return "", false
	}
	p.dropLease(l)
	if skip {
		p.ann(person).skipped[l.item] = struct{}{}
		p.m.leases.WithLabelValues("skipped").Inc()
	}
	return p.ids[l.item], true
}

// markDone notes that a person has labelled an item (a refusal said so).
func (p *pool) markDone(person, item string) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if n, ok := p.num[item]; ok {
		if a := p.ann(person); a.done != nil {
			a.done[n] = struct{}{}
		}
	}
}

// known reports whether an item id is in the pool's view of the project.
func (p *pool) known(item string) bool {
	p.mu.Lock()
	defer p.mu.Unlock()
	_, ok := p.num[item]
	return ok
}

// holds reports whether person has a live lease on item.
func (p *pool) holds(person, item string, now time.Time) bool {
	p.mu.Lock()
	defer p.mu.Unlock()
	a, ok := p.anns[person]
	return ok && a.lease != nil && now.Before(a.lease.expires) && p.ids[a.lease.item] == item
}

// Progress is what a person sees of their own work and of the pool.
type Progress struct {
	Labelled int `json:"labelled"`  // labels this person has given
	Today    int `json:"today"`     // of which today (UTC)
	Skipped  int `json:"skipped"`   // items skipped since the server started
	OpenPool int `json:"open_pool"` // items that still want labels
}

func (p *pool) progress(person string, now time.Time) (Progress, error) {
	p.mu.Lock()
	defer p.mu.Unlock()
	a := p.ann(person)
	if err := p.loadDone(person, a); err != nil {
		return Progress{}, err
	}
	return Progress{Labelled: len(a.done), Today: a.perDay[now.UTC().Format(time.DateOnly)],
		Skipped: len(a.skipped), OpenPool: p.open}, nil
}

// PoolStatus is the pool as the board shows it.
type PoolStatus struct {
	WorkItems  int `json:"work_items"`  // items handed out as work (all but gold)
	OpenItems  int `json:"open_items"`  // of which still wanting labels
	LiveLeases int `json:"live_leases"` // items in someone's hands now (one per person at most)
	Redundancy int `json:"redundancy"`  // labels wanted per item
}

func (p *pool) status() PoolStatus {
	p.mu.Lock()
	defer p.mu.Unlock()
	return PoolStatus{WorkItems: len(p.order), OpenItems: p.open, LiveLeases: len(p.leases),
		Redundancy: p.cfg.Redundancy}
}

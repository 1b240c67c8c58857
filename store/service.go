package store

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"
	"sync"
	"time"

	bolt "go.etcd.io/bbolt"

	"handoff"
)

// What the HTTP service writes: labels sent one at a time with an
// idempotency key, and the leases that hand items out to people. These writes
// are group-committed (see batch): many concurrent calls share one
// transaction and one fsync, and each call returns only after that
// transaction has committed.
//
// The service's buckets are created on first use, so files made before they
// existed open as usual.
var (
	bSvcKeys   = []byte("svc_labels")  // item number (8 bytes BE) ‖ annotator id → label number (8 bytes BE) ‖ class index (2 bytes BE) ‖ idempotency key
	bSvcLeases = []byte("svc_leases")  // lease id → JSON ServiceLease
	bSvcUnsure = []byte("svc_unsure")  // item id ‖ 0 ‖ annotator id → time (Unix ns, 8 bytes BE)
	bSvcTarget = []byte("svc_targets") // next-batch key → JSON targets (the service's; see PutServiceTargets)
)

// ServiceLease is an item handed out to one person until Expires. While a
// lease is live the item counts as taken by that person; once it expires the
// item returns to the pool.
type ServiceLease struct {
	ID        string    `json:"id"`
	Item      string    `json:"item"`
	Annotator string    `json:"annotator"`
	Expires   time.Time `json:"expires"`
}

// Submission is one label sent through the service.
//
// Rules: Label follows the handoff.Label rules. Key is the idempotency key
// chosen by the sender, non-empty and at most 200 bytes, scoped to the
// annotator and the item: sending the same label with the same key again
// never writes a second label. (A person labels an item at most once
// through Submit, so the item and the person find the label; the key tells
// a retry from a second answer.)
// Lease is the id of the lease the item was handed out under, or "" for a
// label sent without one. With LeaseChecked set the caller has already
// checked the lease (for example against leases it keeps in memory): Submit
// then only ends the stored copy, if there is one.
type Submission struct {
	Label        handoff.Label
	Key          string
	Lease        string
	LeaseChecked bool
}

// SubmitResult says what Submit did.
type SubmitResult struct {
	// N is the label's number (its place in order of arrival).
	N uint64
	// Duplicate is true when the key had been used before with the same
	// item and class: nothing was written and N is the number of the label
	// written the first time.
	Duplicate bool
	// Label is the stored label (for a duplicate, as first stored).
	Label handoff.Label
}

// Errors returned by Submit (wrapped, test with errors.Is). Each means
// nothing was written.
var (
	errLeaseUnknown    = errors.New("no such lease: fetch the next item again")
	errLeaseExpired    = errors.New("the lease has expired: fetch the next item again")
	errLeaseMismatch   = errors.New("the lease was given for another item or person")
	ErrAlreadyLabelled = errors.New("this person has already labelled this item")
	ErrKeyReused       = errors.New("the idempotency key was already used for a different label")
	// ErrNotLatest is returned by ChangeLabel.
	ErrNotLatest = errors.New("only your latest answer given on the labelling page can be changed")
	// ErrTooLate is returned by ChangeLabel.
	ErrTooLate = errors.New("the answer is too old to change")
)

// maxKey is the longest idempotency key accepted, in bytes.
const maxKey = 200

// SetGroupSize caps how many writes share one group commit (n ≤ 0 keeps
// the default, 2000).
func (s *Store) SetGroupSize(n int) {
	s.groupOf().setMax(n)
}

// groups holds each open file's group-commit queue, keyed by its bbolt
// handle so that borrowed Store handles share it; Close drops the entry.
var groups sync.Map // *bolt.DB → *groupCommit (shared by borrowed handles)

func (s *Store) groupOf() *groupCommit {
	if g, ok := groups.Load(s.db); ok {
		return g.(*groupCommit)
	}
	g, _ := groups.LoadOrStore(s.db, &groupCommit{})
	return g.(*groupCommit)
}

func (g *groupCommit) setMax(n int) {
	g.mu.Lock()
	g.max = n
	g.mu.Unlock()
}

// groupCommit gathers the service's writes into shared transactions.
type groupCommit struct {
	mu      sync.Mutex
	pending []*groupCall
	running bool
	timer   bool // a rider's timer is set to start commitLoop
	max     int
}

// groupCall is one queued write: a caller waiting on done, or (done nil) a
// rider that nobody waits for, whose outcome goes to after.
type groupCall struct {
	fn    func(tx *bolt.Tx) error
	done  chan error
	after func(error)
}

// finish hands the call its outcome.
func (c *groupCall) finish(err error) {
	if c.done != nil {
		c.done <- err
		return
	}
	if c.after != nil {
		c.after(err)
	}
}

// riderDelay is how long a rider waits for a write that someone waits on
// before it is committed on its own.
const riderDelay = 2 * time.Millisecond

// batch runs fn in a group-committed write transaction and returns once it
// has committed (group commit). While one transaction commits, the writes
// that arrive queue up; the next transaction takes all of them (up to the
// cap), so under load one fsync serves many writers, and an idle store
// commits a lone write at once. (bbolt's DB.Batch closes a batch after a
// fixed delay even while the previous commit is still running, which splits
// concurrent writers into several small commits when fsync is slow.)
//
// fn may be called more than once (if another write of its group fails, the
// group is run again without it) and must reset whatever it records outside
// the transaction on each call. The group holds the store's write lock, so
// it never lands among the rows of a chunked import.
func (s *Store) batch(fn func(tx *bolt.Tx) error) error {
	c := &groupCall{fn: fn, done: make(chan error, 1)}
	g := s.groupOf()
	g.mu.Lock()
	g.pending = append(g.pending, c)
	if !g.running {
		g.running = true
		go s.commitLoop()
	}
	g.mu.Unlock()
	return <-c.done
}

// ride queues fn for the next group commit without waiting for it (a
// rider): it shares the transaction of the next writes that callers wait
// on, so it costs no commit and no fsync of its own; if none comes within
// riderDelay, it is committed on its own. after (may be nil) gets the
// outcome once that transaction has ended; it runs in the committing
// goroutine, so it must be quick and must not write to the store. fn
// follows the rules of batch.
func (s *Store) ride(fn func(tx *bolt.Tx) error, after func(error)) {
	c := &groupCall{fn: fn, after: after}
	g := s.groupOf()
	g.mu.Lock()
	g.pending = append(g.pending, c)
	if !g.running && !g.timer {
		g.timer = true
		time.AfterFunc(riderDelay, func() {
			g.mu.Lock()
			g.timer = false
			if !g.running && len(g.pending) > 0 {
				g.running = true
				go s.commitLoop()
			}
			g.mu.Unlock()
		})
	}
	g.mu.Unlock()
}

// commitLoop commits queued writes, a group at a time, until none are left.
func (s *Store) commitLoop() {
	g := s.groupOf()
	for {
		g.mu.Lock()
		n := len(g.pending)
		if n == 0 {
			g.running = false
			g.mu.Unlock()
			return
		}
		max := g.max
		if max <= 0 {
			max = 2000
		}
		n = min(n, max)
		calls := append([]*groupCall(nil), g.pending[:n]...)
		g.pending = append(g.pending[:0], g.pending[n:]...)
		g.mu.Unlock()
		s.commitGroup(calls)
	}
}

// commitGroup runs calls in one transaction. A call whose fn fails gets its
// error and the rest are run again without it.
func (s *Store) commitGroup(calls []*groupCall) {
	s.wmu.Lock()
	defer s.wmu.Unlock()
	for len(calls) > 0 {
		failed := -1
		err := s.db.Update(func(tx *bolt.Tx) error {
			for i, c := range calls {
				if err := safeCall(c.fn, tx); err != nil {
					failed = i
					return err
				}
			}
			return nil
		})
		if err != nil && failed >= 0 {
			calls[failed].finish(err)
			calls = append(calls[:failed], calls[failed+1:]...)
			continue
		}
		for _, c := range calls {
			c.finish(err)
		}
		return
	}
}

// safeCall turns a panic in fn into an error, so that one bad write cannot
// leave the others waiting.
func safeCall(fn func(tx *bolt.Tx) error, tx *bolt.Tx) (err error) {
	defer func() {
		if p := recover(); p != nil {
			err = fmt.Errorf("store: panic in a grouped write: %v", p)
		}
	}()
	return fn(tx)
}

func svcKey(a, b string) []byte {
	k := make([]byte, 0, len(a)+1+len(b))
	k = append(k, a...)
	k = append(k, 0)
	return append(k, b...)
}

// doneKey is the key of a label sent through Submit: item number ‖
// annotator id. Items are handed out roughly in order, so these keys are
// written near one another (few pages per commit).
func doneKey(item []byte, annotator string) []byte {
	k := make([]byte, 0, 8+len(annotator))
	k = append(k, item...)
	return append(k, annotator...)
}

// doneKeyQ is doneKey for a label of question q: the first question's key
// is doneKey's (as before trees); a follow-up's adds a NUL (never in an
// annotator id) and q, so that a person answers each question of an item
// once and an idempotency key is checked within its question.
func doneKeyQ(item []byte, annotator string, q int) []byte {
	k := doneKey(item, annotator)
	if q == 0 {
		return k
	}
	return append(k, 0, byte(q))
}

// doneRecord decodes a svc_labels value.
func doneRecord(v []byte) (n uint64, class uint16, key string, ok bool) {
	if len(v) < 10 {
		return 0, 0, "", false
	}
	return binary.BigEndian.Uint64(v[:8]), binary.BigEndian.Uint16(v[8:10]), string(v[10:]), true
}

// Submit writes one label unless its idempotency key has been seen, and
// returns only after the write has committed (group commit: concurrent calls
// share transactions). In the same transaction it checks and ends the lease:
// the lease must exist, belong to the label's annotator and item, and not
// have expired at the time of the transaction; it is deleted when the label
// is written. A person may label an item once per wave (ErrAlreadyLabelled);
// the label gets the project's open wave (OpenWave).
//
// A Submission that breaks the label rules returns a *DataError; the lease
// and key problems return the Err… values above (wrapped). The key is looked
// up first, so a retry of an acknowledged label succeeds (Duplicate) even
// though its lease is gone.
func (s *Store) Submit(sub Submission, source string) (SubmitResult, error) {
	l := sub.Label
	if sub.Key == "" || len(sub.Key) > maxKey {
		return SubmitResult{}, dataErr("idempotency_key", "the idempotency key must have 1 to %d bytes, has %d", maxKey, len(sub.Key))
	}
	if l.Annotator == "" {
		return SubmitResult{}, dataErr("annotator", "empty annotator id")
	}
	if bytes.IndexByte([]byte(l.Annotator), 0) >= 0 {
		return SubmitResult{}, dataErr("annotator", "annotator id contains a NUL byte")
	}
	code, err := s.classCode(l.Question, l.Class)
	if err != nil {
		return SubmitResult{}, err
	}
	ci := int(code)
	lq, _ := splitClass(s.cb, code)
	if math.IsNaN(l.Seconds) || math.IsInf(l.Seconds, 0) || l.Seconds < 0 {
		return SubmitResult{}, dataErr("seconds", "seconds %v is not a finite number ≥ 0", l.Seconds)
	}
	var (
		res     SubmitResult
		outcome error
	)
	// The audit entry's detail, but for the label's number: formatted here
	// rather than in the shared transaction, which one goroutine runs for
	// everyone.
	detail := fmt.Sprintf(": item %q, class %q, by %q", l.Item, l.Class, l.Annotator)
	err = s.batch(func(tx *bolt.Tx) error {
		res, outcome = SubmitResult{}, nil
		keys, err := tx.CreateBucketIfNotExists(bSvcKeys)
		if err != nil {
			return err
		}
		itemNum := tx.Bucket(bItemIDs).Get([]byte(l.Item))
		if itemNum == nil {
			outcome = dataErr("item", "unknown item %q", l.Item)
			return nil
		}
		ik := doneKeyQ(itemNum, l.Annotator, lq)
		wave := openWave(tx)
		if v := keys.Get(ik); v != nil && doneInWave(tx, v, wave) {
			n, class, key, ok := doneRecord(v)
			switch {
			case !ok:
				return fmt.Errorf("store: damaged record of item %q by %q", l.Item, l.Annotator)
			case key != sub.Key:
				outcome = fmt.Errorf("item %q: %w", l.Item, ErrAlreadyLabelled)
			case int(class) != ci:
				outcome = fmt.Errorf("key %q: %w", sub.Key, ErrKeyReused)
			default:
				first, err := s.labelAt(tx, n)
				if err != nil {
					return err
				}
				res = SubmitResult{N: n, Duplicate: true, Label: first}
			}
			return nil
		}
		leases, err := tx.CreateBucketIfNotExists(bSvcLeases)
		if err != nil {
			return err
		}
		if sub.Lease != "" && !sub.LeaseChecked {
			v := leases.Get([]byte(sub.Lease))
			if v == nil {
				outcome = fmt.Errorf("lease %q: %w", sub.Lease, errLeaseUnknown)
				return nil
			}
			var ls ServiceLease
			if err := json.Unmarshal(v, &ls); err != nil {
				return fmt.Errorf("store: damaged lease %q: %w", sub.Lease, err)
			}
			if ls.Annotator != l.Annotator || ls.Item != l.Item {
				outcome = fmt.Errorf("lease %q: %w", sub.Lease, errLeaseMismatch)
				return nil
			}
			if !s.now().Before(ls.Expires) {
				outcome = fmt.Errorf("lease %q expired at %s: %w", sub.Lease, ls.Expires.Format(time.RFC3339), errLeaseExpired)
				return nil
			}
		}
		// Has this person labelled the item in an import? Walk the item's
		// labels (a handful) rather than the person's (possibly thousands).
		item := binary.BigEndian.Uint64(itemNum)
		ann, hasAnn := uint64(0), false
		if k := tx.Bucket(bAnnotatorIDs).Get([]byte(l.Annotator)); k != nil {
			ann, hasAnn = binary.BigEndian.Uint64(k), true
		}
		labels := tx.Bucket(bLabels)
		if hasAnn {
			prefix := u64(item)
			c := tx.Bucket(bLabelItem).Cursor()
			var r LabelRecord
			for k, _ := c.Seek(prefix); k != nil && bytes.HasPrefix(k, prefix); k, _ = c.Next() {
				if err := decodeLabel(labels.Get(k[8:]), &r); err != nil {
					return err
				}
				if rq, _ := splitClass(s.cb, r.Class); uint64(r.Annotator) == ann && r.Wave == wave && rq == lq {
					outcome = fmt.Errorf("item %q: %w", l.Item, ErrAlreadyLabelled)
					return nil
				}
			}
		}
		a, err := newAnnotatorCache(tx, map[string]uint32{}).get(l.Annotator)
		if err != nil {
			return err
		}
		r := LabelRecord{Item: uint32(item), Annotator: a, Class: uint16(ci), Seconds: l.Seconds, Wave: wave}
		if !l.Time.IsZero() {
			r.Time = l.Time.UnixNano()
		}
		labels.FillPercent = 1
		seq := labels.Sequence()
		if err := labels.Put(u64(seq), encodeLabel(&r)); err != nil {
			return err
		}
		if err := tx.Bucket(bLabelItem).Put(pair(uint64(r.Item), seq), nil); err != nil {
			return err
		}
		if err := tx.Bucket(bLabelAnn).Put(pair(uint64(r.Annotator), seq), nil); err != nil {
			return err
		}
		if err := labels.SetSequence(seq + 1); err != nil {
			return err
		}
		v := make([]byte, 10, 10+len(sub.Key))
		binary.BigEndian.PutUint64(v, seq)
		binary.BigEndian.PutUint16(v[8:], uint16(ci))
		v = append(v, sub.Key...)
		if err := keys.Put(ik, v); err != nil {
			return err
		}
		if sub.Lease != "" {
			if err := leases.Delete([]byte(sub.Lease)); err != nil {
				return err
			}
		}
		res = SubmitResult{N: seq, Label: l}
		if !l.Time.IsZero() {
			res.Label.Time = time.Unix(0, r.Time).UTC()
		}
		return s.audit(tx, source, "labels.add", "label "+strconv.FormatUint(seq, 10)+detail)
	})
	if err != nil {
		return SubmitResult{}, err
	}
	return res, outcome
}

// GrantLeaseLater stores a lease (replacing one with the same id) without
// waiting: the write rides along with the next group commit (see ride), so
// handing out work costs neither a wait nor a commit of its own. Leases are
// not recorded in the audit trail: they change no data, only who is working
// on what. after (may be nil)
// gets the outcome once that commit has ended (quick, no store writes: see
// ride); until then a crash may lose the lease.
func (s *Store) GrantLeaseLater(l ServiceLease, after func(error)) {
	fn, err := grantLease(l)
	if err != nil {
		if after != nil {
			after(err)
		}
		return
	}
	s.ride(fn, after)
}

// grantLease checks l and returns the write that stores it.
func grantLease(l ServiceLease) (func(tx *bolt.Tx) error, error) {
	if l.ID == "" || l.Item == "" || l.Annotator == "" {
		return nil, dataErr("lease", "a lease needs an id, an item and an annotator")
	}
	v, err := json.Marshal(l)
	if err != nil {
		return nil, err
	}
	return func(tx *bolt.Tx) error {
		if tx.Bucket(bItemIDs).Get([]byte(l.Item)) == nil {
			return dataErr("item", "unknown item %q", l.Item)
		}
		b, err := tx.CreateBucketIfNotExists(bSvcLeases)
		if err != nil {
			return err
		}
		return b.Put([]byte(l.ID), v)
	}, nil
}

// EndLeases deletes the leases with the given ids (absent ones are ignored)
// in one group-committed transaction.
func (s *Store) EndLeases(ids []string) error {
	if len(ids) == 0 {
		return nil
	}
	return s.batch(func(tx *bolt.Tx) error {
		b := tx.Bucket(bSvcLeases)
		if b == nil {
			return nil
		}
		for _, id := range ids {
			if err := b.Delete([]byte(id)); err != nil {
				return err
			}
		}
		return nil
	})
}

// ServiceLeases returns every stored lease, live or expired, ordered by id.
func (s *Store) ServiceLeases() ([]ServiceLease, error) {
	var out []ServiceLease
	err := s.db.View(func(tx *bolt.Tx) error {
		b := tx.Bucket(bSvcLeases)
		if b == nil {
			return nil
		}
		return b.ForEach(func(k, v []byte) error {
			var l ServiceLease
			if err := json.Unmarshal(v, &l); err != nil {
				return fmt.Errorf("store: damaged lease %q: %w", k, err)
			}
			out = append(out, l)
			return nil
		})
	})
	return out, err
}

// IdempotencyKeys returns the number of labels written through Submit (each
// keeps its idempotency key).
func (s *Store) IdempotencyKeys() (int, error) {
	n := 0
	err := s.db.View(func(tx *bolt.Tx) error {
		if b := tx.Bucket(bSvcKeys); b != nil {
			n = b.Stats().KeyN
		}
		return nil
	})
	return n, err
}

// MarkUnsure records that a person looked at an item and could not decide
// (group commit; recorded in the audit trail). Marking the same item twice
// by the same person keeps the latest time.
func (s *Store) MarkUnsure(item, annotator, source string) error {
	if annotator == "" || bytes.IndexByte([]byte(item), 0) >= 0 {
		return dataErr("annotator", "empty annotator id or NUL in the item id")
	}
	return s.batch(func(tx *bolt.Tx) error {
		if tx.Bucket(bItemIDs).Get([]byte(item)) == nil {
			return dataErr("item", "unknown item %q", item)
		}
		b, err := tx.CreateBucketIfNotExists(bSvcUnsure)
		if err != nil {
			return err
		}
		if err := b.Put(svcKey(item, annotator), u64(uint64(s.now().UnixNano()))); err != nil {
			return err
		}
		return s.audit(tx, source, "labels.unsure", fmt.Sprintf("item %q: %q was unsure", item, annotator))
	})
}

// EachUnsure calls fn for every unsure mark (item, person), ordered by item
// id then person.
func (s *Store) EachUnsure(fn func(item, annotator string) error) error {
	return s.db.View(func(tx *bolt.Tx) error {
		b := tx.Bucket(bSvcUnsure)
		if b == nil {
			return nil
		}
		return b.ForEach(func(k, _ []byte) error {
			i := bytes.IndexByte(k, 0)
			if i < 0 {
				return fmt.Errorf("store: damaged unsure mark %q", k)
			}
			return fn(string(k[:i]), string(k[i+1:]))
		})
	})
}

// UnsureCounts returns, per item, how many people marked it unsure (items
// nobody marked are absent).
func (s *Store) UnsureCounts() (map[string]int, error) {
	out := map[string]int{}
	err := s.EachUnsure(func(item, _ string) error {
		out[item]++
		return nil
	})
	return out, err
}

// Check runs bbolt's consistency check over the whole file (every page
// reachable once, freelist and tree structure sound) and returns the first
// problems found, joined, or nil for a clean file.
func (s *Store) Check() error {
	var errs []error
	err := s.db.View(func(tx *bolt.Tx) error {
		for e := range tx.Check() {
			if len(errs) < 10 {
				errs = append(errs, e)
			}
		}
		return nil
	})
	if err != nil {
		return err
	}
	return errors.Join(errs...)
}

// LabelByKey returns the label a person sent for an item through Submit
// under an idempotency key, and whether there is one (same person, item and
// key).
func (s *Store) LabelByKey(item, annotator, key string) (SubmitResult, bool, error) {
	var res SubmitResult
	found := false
	err := s.db.View(func(tx *bolt.Tx) error {
		keys := tx.Bucket(bSvcKeys)
		itemNum := tx.Bucket(bItemIDs).Get([]byte(item))
		if keys == nil || itemNum == nil {
			return nil
		}
		v := keys.Get(doneKey(itemNum, annotator))
		if v == nil {
			return nil
		}
		n, _, k, ok := doneRecord(v)
		if !ok {
			return fmt.Errorf("store: damaged record of item %q by %q", item, annotator)
		}
		if k != key {
			return nil
		}
		l, err := s.labelAt(tx, n)
		if err != nil {
			return err
		}
		res, found = SubmitResult{N: n, Duplicate: true, Label: l}, true
		return nil
	})
	return res, found, err
}

func (s *Store) labelAt(tx *bolt.Tx, n uint64) (handoff.Label, error) {
	var r LabelRecord
	if err := decodeLabel(tx.Bucket(bLabels).Get(u64(n)), &r); err != nil {
		return handoff.Label{}, fmt.Errorf("store: label %d: %w", n, err)
	}
	return s.toLabel(tx, &r, map[uint32]string{}, map[uint32]string{})
}

// ChangeLabel changes the class of a person's latest label, which must be
// on item, have been sent through Submit, and have been given at or after
// notBefore (group commit; recorded in the audit trail as labels.change
// with the old and the new class). It returns the label as now stored. The
// label keeps its number and time; its idempotency record keeps the class
// first sent, so a late retry of the first submission is still answered as
// the duplicate it is (with the label as now stored).
func (s *Store) ChangeLabel(annotator, item, class string, notBefore time.Time, source string) (handoff.Label, error) {
	if _, err := s.classCode("", class); err != nil && !s.cb.Tree() {
		return handoff.Label{}, err
	}
	var (
		out     handoff.Label
		outcome error
	)
	err := s.batch(func(tx *bolt.Tx) error {
		out, outcome = handoff.Label{}, nil
		ak := tx.Bucket(bAnnotatorIDs).Get([]byte(annotator))
		itemNum := tx.Bucket(bItemIDs).Get([]byte(item))
		keys := tx.Bucket(bSvcKeys)
		if ak == nil || itemNum == nil || keys == nil {
			outcome = fmt.Errorf("item %q: %w", item, ErrNotLatest)
			return nil
		}
		prefix := append([]byte(nil), ak...)
		c := tx.Bucket(bLabelAnn).Cursor()
		k, _ := c.Seek(u64(binary.BigEndian.Uint64(ak) + 1))
		if k == nil {
			k, _ = c.Last()
		} else {
			k, _ = c.Prev()
		}
		if k == nil || !bytes.HasPrefix(k, prefix) {
			outcome = fmt.Errorf("item %q: %w", item, ErrNotLatest)
			return nil
		}
		n := binary.BigEndian.Uint64(k[8:])
		labels := tx.Bucket(bLabels)
		var r LabelRecord
		if err := decodeLabel(labels.Get(u64(n)), &r); err != nil {
			return err
		}
		rq, _ := splitClass(s.cb, r.Class)
		var qkey string
		if rq > 0 {
			qkey = s.cb.All()[rq].Key
		}
		code, cerr := s.classCode(qkey, class)
		if cerr != nil {
			outcome = cerr
			return nil
		}
		v := keys.Get(doneKeyQ(itemNum, annotator, rq))
		first, _, _, ok := doneRecord(v)
		if uint64(r.Item) != binary.BigEndian.Uint64(itemNum) || !ok || first != n {
			outcome = fmt.Errorf("item %q: %w", item, ErrNotLatest)
			return nil
		}
		if r.Time != 0 && time.Unix(0, r.Time).Before(notBefore) {
			outcome = fmt.Errorf("item %q: %w", item, ErrTooLate)
			return nil
		}
		_, old, err := s.classOf(r.Class)
		if err != nil {
			return err
		}
		r.Class = code
		if err := labels.Put(u64(n), encodeLabel(&r)); err != nil {
			return err
		}
		l, err := s.toLabel(tx, &r, map[uint32]string{}, map[uint32]string{})
		if err != nil {
			return err
		}
		out = l
		return s.audit(tx, source, "labels.change", fmt.Sprintf("label %d: item %q, class %q → %q, by %q", n, item, old, class, annotator))
	})
	if err != nil {
		return handoff.Label{}, err
	}
	return out, outcome
}

// PutServiceTargets stores the service's label targets for one next batch
// under key (free-form bytes; the service writes JSON), replacing every
// earlier entry: only the latest batch's targets are kept.
func (s *Store) PutServiceTargets(key string, data []byte) error {
	return s.write(func(tx *bolt.Tx) error {
		if err := tx.DeleteBucket(bSvcTarget); err != nil && !errors.Is(err, bolt.ErrBucketNotFound) {
			return err
		}
		b, err := tx.CreateBucket(bSvcTarget)
		if err != nil {
			return err
		}
		return b.Put([]byte(key), append([]byte(nil), data...))
	})
}

// ServiceTargets returns the targets stored under key, or ErrNotFound.
func (s *Store) ServiceTargets(key string) ([]byte, error) {
	var out []byte
	err := s.db.View(func(tx *bolt.Tx) error {
		b := tx.Bucket(bSvcTarget)
		if b == nil {
			return fmt.Errorf("targets %q: %w", key, ErrNotFound)
		}
		v := b.Get([]byte(key))
		if v == nil {
			return fmt.Errorf("targets %q: %w", key, ErrNotFound)
		}
		out = append([]byte(nil), v...)
		return nil
	})
	return out, err
}

// AnnotatorsWithLabels returns the number of annotators with at least one
// label (Stats.Annotators counts every annotator the project knows, people
// added for the service who have not labelled yet among them). It jumps
// from annotator to annotator in the by-annotator index.
func (s *Store) AnnotatorsWithLabels() (int, error) {
	n := 0
	err := s.db.View(func(tx *bolt.Tx) error {
		c := tx.Bucket(bLabelAnn).Cursor()
		for k, _ := c.First(); k != nil; {
			n++
			next := binary.BigEndian.Uint64(k[:8]) + 1
			if next == 0 {
				break
			}
			k, _ = c.Seek(u64(next))
		}
		return nil
	})
	return n, err
}

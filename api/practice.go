package api

import (
	"errors"
	"math"
	"math/rand/v2"
	"net/http"
	"slices"
	"sort"

	"github.com/labstack/echo/v4"

	"handoff"
)

// The practice gate: before real work an annotator answers Config.Practice
// gold items, seeing the expert's answer after each (practice), then
// Config.Check gold items whose answers are never shown (the check), of
// which a share of Config.PassMark must match the experts' answers.
//
// So that the check cannot be passed by trying answers until one works:
//   - each attempt draws its items afresh, at random, from the gold items
//     not used for practice, preferring items the previous attempt did not
//     show, and shows them in a random order;
//   - the score of a failed attempt is never shown (only how many answers
//     must match), and nothing tells which answers were wrong;
//   - a person has Config.CheckAttempts attempts (default 3); after the last
//     one fails they wait for the team to grant another (the board, or
//     POST /api/v1/people/{id}/check).
// With little gold the draws overlap: with exactly as many check items as
// the check asks for, every attempt shows the same items in a new order.

// Practice states, as the API and the pages name them.
const (
	stateOff      = "off"      // the project has no gold: no practice, no check
	statePractice = "practice" // answering practice items
	stateCheck    = "check"    // answering check items
	statePassed   = "passed"   // may do real work
	stateFailed   = "failed"   // the last attempt did not pass; another may start
	stateLocked   = "locked"   // no attempts left until the team grants one
)

// practiceSet is the gold split: the practice items (the first
// Config.Practice gold items in item-id order) and the check pool (every
// other gold item), from which each attempt draws check items.
type practiceSet struct {
	practice []handoff.Gold
	pool     []handoff.Gold
	gold     map[string]string // item → expert class, for every gold item
	check    int               // check items per attempt
}

func (t practiceSet) off() bool { return len(t.practice)+t.check == 0 }

// practiceItems splits the gold items, in item-id order, into
// Config.Practice practice items and the check pool; an attempt shows
// Config.Check of the pool. With too little gold the check gets what is left
// after practice, and with fewer than Practice+1 gold items half (rounded
// down) are practice and the rest the check pool.
//
// The split is cached until gold is imported again (forgetPractice).
func (sv *Server) practiceItems() (practiceSet, error) {
	sv.trMu.Lock()
	defer sv.trMu.Unlock()
	if sv.trSet != nil {
		return *sv.trSet, nil
	}
	gold, err := sv.st.Gold()
	if err != nil {
		return practiceSet{}, err
	}
	sort.Slice(gold, func(i, j int) bool { return gold[i].Item < gold[j].Item })
	p, q := sv.cfg.Practice, sv.cfg.Check
	n := len(gold)
	if p+q == 0 || n == 0 {
		sv.trSet = &practiceSet{}
		return *sv.trSet, nil
	}
	if n < p+q {
		if q > 0 && n <= p {
			p = n / 2
		}
		p = min(p, n)
		q = min(q, n-p)
	}
	ts := practiceSet{practice: gold[:p], gold: map[string]string{}, check: q}
	if q > 0 {
		ts.pool = gold[p:]
	}
	for _, g := range gold {
		ts.gold[g.Item] = g.Class
	}
	sv.trSet = &ts
	return ts, nil
}

func (sv *Server) forgetPractice() {
	sv.trMu.Lock()
	sv.trSet = nil
	sv.trMu.Unlock()
}

// draw picks the check items of a new attempt: n items of the pool in a
// random order, those not in previous first.
func (t practiceSet) draw(previous []string) []string {
	ids := make([]string, len(t.pool))
	for i, g := range t.pool {
		ids[i] = g.Item
	}
	rand.Shuffle(len(ids), func(i, j int) { ids[i], ids[j] = ids[j], ids[i] })
	seen := map[string]bool{}
	for _, id := range previous {
		seen[id] = true
	}
	sort.SliceStable(ids, func(i, j int) bool { return !seen[ids[i]] && seen[ids[j]] })
	ids = ids[:min(t.check, len(ids))]
	rand.Shuffle(len(ids), func(i, j int) { ids[i], ids[j] = ids[j], ids[i] })
	return ids
}

// needed is the number of check answers that must match to pass an attempt
// of n items.
func (sv *Server) needed(n int) int {
	return int(math.Ceil(sv.cfg.PassMark*float64(n) - 1e-9))
}

// attemptsLeft returns the attempts a person still has (-1: no limit).
func (sv *Server) attemptsLeft(ps PracticeState) int {
	if sv.cfg.CheckAttempts < 0 {
		return -1
	}
	return max(0, sv.cfg.CheckAttempts+ps.Extra-ps.Attempts)
}

// stateOf says where a person stands and which item they answer next ("" if
// none). A state of "check" with no drawn items means an attempt is due:
// prepare draws it.
func (sv *Server) stateOf(t practiceSet, ps PracticeState) (state, item string) {
	switch {
	case t.off():
		return stateOff, ""
	case ps.Passed:
		return statePassed, ""
	case ps.Done < len(t.practice):
		return statePractice, t.practice[ps.Done].Item
	case t.check == 0:
		// Practice only (no check items): done once practised.
		return statePassed, ""
	case len(ps.CheckItems) == 0:
		if sv.attemptsLeft(ps) == 0 {
			return stateLocked, ""
		}
		return stateCheck, ""
	case ps.CheckDone < len(ps.CheckItems):
		return stateCheck, ps.CheckItems[ps.CheckDone]
	case sv.attemptsLeft(ps) == 0:
		return stateLocked, ""
	}
	return stateFailed, ""
}

// prepare draws the check items of an attempt that is due, and says whether
// it changed ps. Items that are no longer gold start the attempt again.
func (sv *Server) prepare(t practiceSet, ps *PracticeState) bool {
	for _, id := range ps.CheckItems[ps.CheckDone:] {
		if _, ok := t.gold[id]; !ok {
			ps.CheckItems, ps.CheckDone, ps.CheckRight = nil, 0, 0
			break
		}
	}
	if st, _ := sv.stateOf(t, *ps); st == stateCheck && len(ps.CheckItems) == 0 {
		ps.CheckItems = t.draw(nil)
		ps.CheckDone, ps.CheckRight = 0, 0
		return true
	}
	return false
}

// PracticeView is where a person stands in the practice gate.
//
// State is "off" (the project has no gold: real work at once), "practice",
// "check", "passed", "failed" (the last check attempt did not pass; POST
// /api/v1/practice/retry starts another) or "locked" (no attempts left:
// the team may grant another). Item is the item to answer in the states
// "practice" and "check". A failed attempt's score is not shown: only
// CheckNeeded, the answers that must match out of CheckItems.
type PracticeView struct {
	State         string    `json:"state"`
	PracticeDone  int       `json:"practice_done"`
	PracticeItems int       `json:"practice_items"`
	CheckDone     int       `json:"check_done"`
	CheckItems    int       `json:"check_items"`
	CheckNeeded   int       `json:"check_needed"`
	PassMark      float64   `json:"pass_mark"`
	Attempts      int       `json:"attempts"`
	AttemptsLeft  int       `json:"attempts_left"` // -1: no limit
	Item          *ItemView `json:"item,omitempty"`
}

// practiceView returns a person's view, drawing the check items of an
// attempt that is due (recorded under source).
func (sv *Server) practiceView(person, source string) (PracticeView, error) {
	ts, err := sv.practiceItems()
	if err != nil {
		return PracticeView{}, err
	}
	p, err := sv.auth.person(person)
	if err != nil {
		return PracticeView{}, err
	}
	ps := p.Practice
	if st, item := sv.stateOf(ts, ps); st == stateCheck && item == "" {
		up, err := sv.auth.updatePerson(person, source, func(p *Person) error {
			sv.prepare(ts, &p.Practice)
			return nil
		})
		if err != nil {
			return PracticeView{}, err
		}
		ps = up.Practice
	}
	return sv.viewOf(ts, ps)
}

func (sv *Server) viewOf(ts practiceSet, ps PracticeState) (PracticeView, error) {
	st, item := sv.stateOf(ts, ps)
	n := ts.check
	if len(ps.CheckItems) > 0 {
		n = len(ps.CheckItems)
	}
	v := PracticeView{State: st, PracticeDone: ps.Done, PracticeItems: len(ts.practice), CheckDone: ps.CheckDone,
		CheckItems: n, CheckNeeded: sv.needed(n), PassMark: sv.cfg.PassMark, Attempts: ps.Attempts,
		AttemptsLeft: sv.attemptsLeft(ps)}
	if st == stateCheck && ps.CheckDone >= len(ps.CheckItems) {
		v.CheckDone = 0
	}
	if item != "" {
		it, _, err := sv.st.Item(item)
		if err != nil {
			return PracticeView{}, err
		}
		iv := itemView(it)
		v.Item = &iv
	}
	return v, nil
}

// practiceDone reports whether a person may get real work.
func (sv *Server) practiceDone(person string) (bool, error) {
	p, err := sv.auth.person(person)
	if err != nil {
		return false, err
	}
	if p.Practice.Passed {
		return true, nil
	}
	ts, err := sv.practiceItems()
	if err != nil {
		return false, err
	}
	st, _ := sv.stateOf(ts, p.Practice)
	return st == stateOff || st == statePassed, nil
}

// practiceShows reports whether the practice gate shows item to person: a
// practice item, or one of their check items.
func (sv *Server) practiceShows(person, item string) (bool, error) {
	ts, err := sv.practiceItems()
	if err != nil {
		return false, err
	}
	for _, g := range ts.practice {
		if g.Item == item {
			return true, nil
		}
	}
	p, err := sv.auth.person(person)
	if err != nil {
		return false, err
	}
	return slices.Contains(p.Practice.CheckItems, item), nil
}

func (sv *Server) getPractice(c echo.Context) error {
	v, err := sv.practiceView(who(c).ID, sv.source(c))
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, v)
}

// PracticeAnswer is the body of POST /api/v1/practice/answers.
type PracticeAnswer struct {
	Item  string `json:"item"`
	Label string `json:"label"`
}

// PracticeFeedback answers a practice or check answer. Correct and Expected
// are given for practice items only; check answers get no feedback, ever.
type PracticeFeedback struct {
	Correct  *bool          `json:"correct,omitempty"`
	Expected *handoff.Class `json:"expected,omitempty"`
	Next     PracticeView   `json:"next"`
}

// errNotShown is an answer to an item the gate does not show now.
var errNotShown = errors.New("not the item shown")

func (sv *Server) postPracticeAnswer(c echo.Context) error {
	pr := who(c)
	var req PracticeAnswer
	if err := decodeJSON(c, &req); err != nil {
		return err
	}
	cb := sv.st.Codebook()
	if _, ok := cb.Index(req.Label); !ok {
		return jsonError(http.StatusUnprocessableEntity, "field \"label\": %q is not a class of the codebook", req.Label)
	}
	ts, err := sv.practiceItems()
	if err != nil {
		return err
	}
	var (
		fb    PracticeFeedback
		state string
	)
	up, err := sv.auth.updatePerson(pr.ID, sv.source(c), func(p *Person) error {
		ps := &p.Practice
		sv.prepare(ts, ps)
		st, item := sv.stateOf(ts, *ps)
		state = st
		if item == "" || item != req.Item {
			return errNotShown
		}
		expected := ts.gold[item]
		if st == statePractice {
			correct := expected == req.Label
			fb.Correct = &correct
			if gi, ok := cb.Index(expected); ok {
				cl := cb.Classes[gi]
				fb.Expected = &cl
			}
			ps.Done++
		} else {
			if expected == req.Label {
				ps.CheckRight++
			}
			ps.CheckDone++
			if ps.CheckDone == len(ps.CheckItems) {
				ps.Attempts++
				ps.Passed = ps.CheckRight >= sv.needed(len(ps.CheckItems))
			}
		}
		sv.prepare(ts, ps)
		return nil
	})
	if errors.Is(err, errNotShown) {
		return jsonError(http.StatusConflict, "answer the item the practice shows now (GET /api/v1/practice); state is %q", state)
	}
	if err != nil {
		return err
	}
	fb.Next, err = sv.viewOf(ts, up.Practice)
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, fb)
}

// postPracticeRetry starts another attempt after a failed one: the practice
// again, then newly drawn check items.
func (sv *Server) postPracticeRetry(c echo.Context) error {
	pr := who(c)
	ts, err := sv.practiceItems()
	if err != nil {
		return err
	}
	var state string
	up, err := sv.auth.updatePerson(pr.ID, sv.source(c), func(p *Person) error {
		ps := &p.Practice
		state, _ = sv.stateOf(ts, *ps)
		if state != stateFailed {
			return errNotShown
		}
		ps.Done, ps.CheckDone, ps.CheckRight = 0, 0, 0
		ps.CheckItems = ts.draw(ps.CheckItems)
		return nil
	})
	if errors.Is(err, errNotShown) {
		msg := "only a failed check can be tried again; state is %q"
		if state == stateLocked {
			msg = "no attempts left (state %q): ask the project team to grant another"
		}
		return jsonError(http.StatusConflict, msg, state)
	}
	if err != nil {
		return err
	}
	v, err := sv.viewOf(ts, up.Practice)
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, v)
}

// CheckSummary is a person's practice gate as the team sees it: the state,
// finished attempts, and the last finished attempt's score.
type CheckSummary struct {
	State    string `json:"state"`
	Attempts int    `json:"attempts"`
	Right    int    `json:"right,omitempty"` // of the last finished attempt
	Of       int    `json:"of,omitempty"`
}

func (sv *Server) checkSummary(ts practiceSet, ps PracticeState) CheckSummary {
	st, _ := sv.stateOf(ts, ps)
	s := CheckSummary{State: st, Attempts: ps.Attempts}
	if ps.Attempts > 0 && ps.CheckDone == len(ps.CheckItems) && len(ps.CheckItems) > 0 {
		s.Right, s.Of = ps.CheckRight, len(ps.CheckItems)
	}
	return s
}

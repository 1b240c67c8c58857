package round

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"handoff"
)

// stateName is where the rounds keep what carries from one round to the next.
const stateName = "rounds"

// state is what carries over between rounds.
//
// Rules: Round counts committed rounds, Look the rounds with labels new
// since the round before (the verdict's looks; see verdict.LookAlpha).
// LabelSeq and Gold are the label sequence and the number of gold answers
// the last round saw, so that a round with nothing new can be told apart.
// HeldOut fixes the held-out set at the first round: an item of that kind
// is a member when its hash is below the share, whatever is labelled later.
// Cohort[id] is the round that first saw held-out member id labelled (see
// StandardConfig.Lag).
// StopSet is a fixed random sample of the items unlabelled at the first
// round; StopPreds[r] are the predicted classes on it after the r-th round
// with new labels. Curve holds, per round with new labels, the labels spent
// and that round's model's predicted class for every held-out member, so
// that every point of the learning curve can be scored on the same
// evaluation set later. Audit are the items sent to people as an audit of
// machine labels; Queue are the items autolabel left below the threshold,
// for people.
type state struct {
	Round     int            `json:"round"`
	Look      int            `json:"look"`
	LabelSeq  uint64         `json:"label_seq"`
	Gold      int            `json:"gold"`
	HeldOut   *heldOutSet    `json:"held_out_set,omitempty"`
	Cohort    map[string]int `json:"cohort,omitempty"`
	StopSet   []string       `json:"stop_set"`
	StopPreds [][]int        `json:"stop_preds"`
	Curve     []curveRound   `json:"curve_rounds"`
	Audit     []string       `json:"audit,omitempty"`
	Queue     []string       `json:"queue,omitempty"`
}

// heldOutSet is the held-out set's definition: items of Kind whose
// heldOutHash(Salt, id) is below Share. Size is how many items that made
// at the first round, Min the minimum asked for then.
type heldOutSet struct {
	Kind  handoff.Kind `json:"kind"`
	Share float64      `json:"share"`
	Salt  uint64       `json:"salt"`
	Min   int          `json:"min"`
	Asked float64      `json:"asked"` // the held-out setting at the first round
}

// member reports whether an item of the set's kind with this id is in the
// held-out set.
func (h *heldOutSet) member(it handoff.Item) bool {
	return h != nil && it.Kind == h.Kind && heldOutHash(h.Salt, it.ID) < h.Share
}

// heldOutHash maps an item id to [0, 1): the first 53 bits of SHA-256(salt
// as 8 little-endian bytes ‖ id) over 2^53. Membership by hash makes the
// held-out set a Bernoulli sample of the whole archive, fixed before any
// label is seen and unaffected by what is labelled later (items added later
// join it at the same rate).
func heldOutHash(salt uint64, id string) float64 {
	var b [8]byte
	binary.LittleEndian.PutUint64(b[:], salt)
	h := sha256.New()
	h.Write(b[:])
	h.Write([]byte(id))
	s := h.Sum(nil)
	return float64(binary.BigEndian.Uint64(s[:8])>>11) / (1 << 53)
}

// heldOutShareFor returns the share drawn into the held-out set for an
// archive of n items: max(share, min/n), at most MaxHeldOutShare.
func heldOutShareFor(share float64, min, n int) float64 {
	s := share
	if n > 0 {
		s = math.Max(s, float64(min)/float64(n))
	}
	return math.Min(s, MaxHeldOutShare)
}

// curveRound is one round with new labels on the learning curve.
type curveRound struct {
	Round  int            `json:"round"`
	Labels int            `json:"labels"`
	Pred   map[string]int `json:"pred"`
}

func decodeState(b []byte) (*state, error) {
	if b == nil {
		return &state{}, nil
	}
	var s state
	if err := json.Unmarshal(b, &s); err != nil {
		return nil, fmt.Errorf("reading the rounds' state: %w", err)
	}
	return &s, nil
}

func (s *state) encode() ([]byte, error) { return json.Marshal(s) }

// clone returns a deep enough copy for a round to change.
func (s *state) clone() *state {
	c := *s
	c.StopSet = slices.Clone(s.StopSet)
	c.StopPreds = slices.Clone(s.StopPreds)
	c.Curve = slices.Clone(s.Curve)
	c.Audit = slices.Clone(s.Audit)
	c.Queue = slices.Clone(s.Queue)
	c.Cohort = make(map[string]int, len(s.Cohort))
	for k, v := range s.Cohort {
		c.Cohort[k] = v
	}
	if s.HeldOut != nil {
		h := *s.HeldOut
		c.HeldOut = &h
	}
	return &c
}

// sample returns k ids drawn without replacement from ids (sorted first, so
// the draw depends only on the set and the seed).
func sample(ids []string, k int, seed, stream uint64) []string {
	ids = slices.Clone(ids)
	slices.Sort(ids)
	rng := rand.New(rand.NewPCG(seed, stream))
	rng.Shuffle(len(ids), func(i, j int) { ids[i], ids[j] = ids[j], ids[i] })
	if k > len(ids) {
		k = len(ids)
	}
	out := ids[:k]
	slices.Sort(out)
	return out
}

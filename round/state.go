package round

import (
	"encoding/json"
	"errors"
	"math/rand/v2"
	"slices"

	"handoff/store"
	"handoff/verdict"
)

// stateName is where the rounds keep what carries from one round to the next.
const stateName = "rounds"

// state is what carries over between rounds.
//
// Rules: HeldOut are item ids reserved for the verdict, never trained on and
// never picked; PendingHeldOut are items picked as held-out top-up that have
// no labels yet (they join HeldOut once labelled, whatever the model thinks
// of them). StopSet is a fixed random sample of the items unlabelled at the
// first round; StopPreds[r] are round r's predicted classes on it. Curve is
// the learning curve, one point per round. Audit are the items sent to
// people as an audit of machine labels; Queue are the items autolabel left below the
// threshold, for people.
type state struct {
	Round          int                  `json:"round"`
	HeldOut        []string             `json:"held_out"`
	PendingHeldOut []string             `json:"pending_held_out,omitempty"`
	StopSet        []string             `json:"stop_set"`
	StopPreds      [][]int              `json:"stop_preds"`
	Curve          []verdict.CurvePoint `json:"curve"`
	Audit          []string             `json:"audit,omitempty"`
	Queue          []string             `json:"queue,omitempty"`
}

func loadState(st *store.Store) (*state, error) {
	b, err := st.State(stateName)
	if errors.Is(err, store.ErrNotFound) {
		return &state{}, nil
	}
	if err != nil {
		return nil, err
	}
	var s state
	if err := json.Unmarshal(b, &s); err != nil {
		return nil, err
	}
	return &s, nil
}

func (s *state) save(st *store.Store, source string) error {
	b, err := json.Marshal(s)
	if err != nil {
		return err
	}
	return st.PutState(stateName, b, source)
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

package round

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strconv"
	"strings"

	"handoff"
	"handoff/crowd"
	"handoff/selector"
	"handoff/store"
	"handoff/verdict"
)

// Config is a project's settings for its rounds: one type, validated in one
// place (Validate), with every user-facing field reachable by a documented
// key (Keys; Set and Get). The project keeps the keys it was given in the
// store (SetSetting, Settings); a round records the whole Config it used.
// Zero values take the defaults shown (DefaultConfig holds them all).
type Config struct {
	Consensus ConsensusConfig `json:"consensus"`
	Train     TrainConfig     `json:"train"`
	// HeldOutShare is the share of the archive (the items of the model's
	// kind) drawn into the held-out set at the first round, as a Bernoulli
	// sample by a seeded hash of the item id (0 means 0.1); the set is at
	// least HeldOutMin items (0 means HeldOutMinFor the max-error and
	// confidence) where the archive has them, and never more than
	// MaxHeldOutShare of it.
	HeldOutShare float64 `json:"held_out_share"`
	HeldOutMin   int     `json:"held_out_min"`
	// Batch is the size of the next batch (0 means 200); Shares splits it
	// over the reasons (nil means DefaultShares).
	Batch  int                         `json:"batch"`
	Shares map[selector.Reason]float64 `json:"shares,omitempty"`
	// Strategy, Beta, Diversity and Balanced configure the model-unsure
	// picks (see selector.Plan).
	Strategy  selector.Strategy `json:"strategy"`
	Beta      float64           `json:"beta,omitempty"`
	Diversity selector.Metric   `json:"diversity,omitempty"`
	Balanced  bool              `json:"balanced,omitempty"`
	// Standard is the reference standard of the held-out set.
	Standard StandardConfig `json:"standard"`
	// StopSet is the size of the fixed random stop set of the stopping rule
	// (0 means 1000).
	StopSet int `json:"stop_set"`
	// Verdict configures the verdict (max error, confidence, gates).
	Verdict verdict.Options `json:"verdict"`
	// Seed seeds every random choice of the round.
	Seed uint64 `json:"seed"`
}

// StandardConfig is the reference standard of the held-out set: a held-out
// item meets it when it is gold, when its consensus posterior reaches Level
// (0 means 0.99), or once Cap crowd labels are kept on it after cleaning (0
// means 9). Until then the next batch asks for more labels on it (reason
// "reference"), before any new held-out item.
//
// Lag says when a held-out item starts to count: from the Lag-th round
// after the round that first saw it labelled (items labelled before the
// first round count from the first), whether it meets the standard by then
// or not (then as a disagreement). Which items count is
// then a matter of time alone, not of how hard the crowd found them, so
// the counted items stay a random sample of the held-out set; set Lag to
// ⌈Cap / labels per request⌉ − 1 so that items can meet the standard in
// time (2 for 3 labels per request and a cap of 9). DefaultConfig has 2.
type StandardConfig struct {
	Level float64 `json:"level"`
	Cap   int     `json:"cap"`
	Lag   int     `json:"lag"`
}

// MaxHeldOutShare is the largest share of the archive the held-out set may
// take, whatever HeldOutMin asks for.
const MaxHeldOutShare = 0.5

// DefaultShares splits a batch over the reasons: held-out top-ups 0.3,
// reference-standard requests 0.2, model-unsure 0.4, crowd-split 0.05,
// model-vs-crowd 0.05. Slots a reason cannot fill go to model-unsure.
func DefaultShares() map[selector.Reason]float64 {
	return map[selector.Reason]float64{selector.ReasonHeldOut: 0.3, selector.ReasonStandard: 0.2,
		selector.ReasonUnsure: 0.4, selector.ReasonSplit: 0.05, selector.ReasonConflict: 0.05}
}

// HeldOutMinFor returns the automatic minimum size of the held-out set:
// three times verdict.MinCountFor(maxErr, 1 − α/110), the fewest items a
// threshold must cover to be tested at look 10 (α_10 = α/110): a GO at
// that look needs a threshold covering at least that many held-out items
// that meet the reference standard, and a machine that can autolabel a
// third of the archive then has them. 594 at max-error 0.05 and 95%.
func HeldOutMinFor(maxErr, confidence float64) int {
	return 3 * verdict.MinCountFor(maxErr, 1-verdict.LookAlpha(1-confidence, 10))
}

// DefaultConfig returns the defaults, every field filled.
func DefaultConfig() Config {
	c := Config{Consensus: DefaultConsensus(), Seed: 1, Standard: StandardConfig{Lag: 2}}
	c.defaults()
	return c
}

func (c *Config) defaults() {
	if c.Consensus.Method == "" {
		d := DefaultConsensus()
		if c.Consensus.Rules == (crowd.Rules{}) && !c.Consensus.NoCleaning {
			c.Consensus.Rules = d.Rules
		}
		c.Consensus.Method = d.Method
	}
	if c.Consensus.Uncertain <= 0 {
		c.Consensus.Uncertain = 0.95
	}
	if c.Consensus.Rules.RepeatTimes <= 0 {
		c.Consensus.Rules.RepeatTimes = crowd.DefaultRules().RepeatTimes
	}
	if c.Train.Lambda <= 0 {
		c.Train.Lambda = 0.1
	}
	if c.Train.Folds <= 0 {
		c.Train.Folds = 5
	}
	if c.HeldOutShare <= 0 {
		c.HeldOutShare = 0.1
	}
	if c.Batch <= 0 {
		c.Batch = 200
	}
	if c.Shares == nil {
		c.Shares = DefaultShares()
	}
	if c.Strategy == "" {
		c.Strategy = selector.Entropy
	}
	if c.Standard.Level <= 0 {
		c.Standard.Level = 0.99
	}
	if c.Standard.Cap <= 0 {
		c.Standard.Cap = 9
	}
	if c.StopSet <= 0 {
		c.StopSet = 1000
	}
	if c.Verdict.MaxError <= 0 {
		c.Verdict.MaxError = 0.05
	}
	if c.Verdict.Confidence <= 0 {
		c.Verdict.Confidence = 0.95
	}
	c.Verdict.Seed = c.Seed
	c.Consensus.Seed = c.Seed
	c.Train.Seed = c.Seed
}

// SettingError is a setting with a value outside its range: a usage error.
// It says which key, the value given and what the key wants.
type SettingError struct {
	Key, Value, Want string
}

func (e *SettingError) Error() string {
	return fmt.Sprintf("setting %s = %q: want %s", e.Key, e.Value, e.Want)
}

// Key is one documented setting.
type Key struct {
	Name string // as typed: `loop config DIR set NAME VALUE`
	Doc  string // what it does
	Want string // its range, in words
	get  func(*Config) string
	set  func(*Config, string) error
}

func bad(k *Key, v string) error { return &SettingError{Key: k.Name, Value: v, Want: k.Want} }

func parseFloat(v string) (float64, bool) {
	x, err := strconv.ParseFloat(strings.TrimSpace(v), 64)
	return x, err == nil && !math.IsNaN(x) && !math.IsInf(x, 0)
}

func parseInt(v string) (int, bool) {
	x, err := strconv.Atoi(strings.TrimSpace(v))
	return x, err == nil
}

func parseOnOff(v string) (bool, bool) {
	switch strings.ToLower(strings.TrimSpace(v)) {
	case "on", "true", "yes", "1":
		return true, true
	case "off", "false", "no", "0":
		return false, true
	}
	return false, false
}

func onOff(b bool) string {
	if b {
		return "on"
	}
	return "off"
}

func fmtFloat(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }

// Methods are the consensus methods a setting may name, besides the
// default consensus's own (DefaultConsensus).
var Methods = []string{crowd.MethodAuto, crowd.MethodHierarchical, crowd.MethodOneCoin, crowd.MethodMajority, crowd.MethodDawidSkene}

// keys lists every setting, in the order `loop config` shows them.
var keys []*Key

func init() {
	num := func(name, doc, want string, field func(*Config) *float64, ok func(float64) bool) *Key {
		k := &Key{Name: name, Doc: doc, Want: want}
		k.get = func(c *Config) string { return fmtFloat(*field(c)) }
		k.set = func(c *Config, v string) error {
			x, good := parseFloat(v)
			if !good || !ok(x) {
				return bad(k, v)
			}
			*field(c) = x
			return nil
		}
		return k
	}
	integer := func(name, doc, want string, field func(*Config) *int, ok func(int) bool) *Key {
		k := &Key{Name: name, Doc: doc, Want: want}
		k.get = func(c *Config) string { return strconv.Itoa(*field(c)) }
		k.set = func(c *Config, v string) error {
			x, good := parseInt(v)
			if !good || !ok(x) {
				return bad(k, v)
			}
			*field(c) = x
			return nil
		}
		return k
	}
	flag := func(name, doc string, field func(*Config) *bool, invert bool) *Key {
		k := &Key{Name: name, Doc: doc, Want: "on or off"}
		k.get = func(c *Config) string { return onOff(*field(c) != invert) }
		k.set = func(c *Config, v string) error {
			b, good := parseOnOff(v)
			if !good {
				return bad(k, v)
			}
			*field(c) = b != invert
			return nil
		}
		return k
	}
	choice := func(name, doc string, values []string, field func(*Config) *string) *Key {
		k := &Key{Name: name, Doc: doc, Want: "one of " + strings.Join(values, ", ")}
		k.get = func(c *Config) string {
			if *field(c) == "" {
				return values[0]
			}
			return *field(c)
		}
		k.set = func(c *Config, v string) error {
			v = strings.TrimSpace(v)
			if !slices.Contains(values, v) {
				return bad(k, v)
			}
			if v == values[0] && values[0] == "auto" || v == "off" {
				v = ""
			}
			*field(c) = v
			return nil
		}
		return k
	}
	text := func(name, doc string, field func(*Config) *string) *Key {
		k := &Key{Name: name, Doc: doc, Want: "a name, or none"}
		k.get = func(c *Config) string {
			if *field(c) == "" {
				return "none"
			}
			return *field(c)
		}
		k.set = func(c *Config, v string) error {
			v = strings.TrimSpace(v)
			if v == "none" {
				v = ""
			}
			if strings.ContainsAny(v, "\n\r\t") {
				return bad(k, v)
			}
			*field(c) = v
			return nil
		}
		return k
	}
	share := func(x float64) bool { return x > 0 && x < 1 }
	keys = []*Key{
		num("max-error", "largest acceptable disagreement with the reference among autolabelled items", "a number in (0, 1)",
			func(c *Config) *float64 { return &c.Verdict.MaxError }, share),
		num("confidence", "confidence of the error bound over all looks (α = 1 − confidence is spent across rounds)", "a number in (0, 1)",
			func(c *Config) *float64 { return &c.Verdict.Confidence }, share),
		flag("median-gate", "GO also needs the machine at least as good as the median annotator", func(c *Config) *bool { return &c.Verdict.NoMedianGate }, true),
		flag("require-stable", "GO also needs the stop rule (stable predictions)", func(c *Config) *bool { return &c.Verdict.RequireStable }, false),
		num("held-out", "share of the archive drawn at random into the held-out set at the first round", "a number in (0, 0.5]",
			func(c *Config) *float64 { return &c.HeldOutShare }, func(x float64) bool { return x > 0 && x <= MaxHeldOutShare }),
		integer("held-out-min", "fewest held-out items (0: automatic, 3× the items a tested threshold needs at look 10; never more than half the archive)", "an integer ≥ 0",
			func(c *Config) *int { return &c.HeldOutMin }, func(x int) bool { return x >= 0 }),
		num("reference-level", "a held-out item meets the reference standard at this consensus posterior…", "a number in [0.5, 1)",
			func(c *Config) *float64 { return &c.Standard.Level }, func(x float64) bool { return x >= 0.5 && x < 1 }),
		integer("reference-cap", "…or once it has this many labels (kept after cleaning)", "an integer ≥ 1",
			func(c *Config) *int { return &c.Standard.Cap }, func(x int) bool { return x >= 1 }),
		integer("reference-lag", "a held-out item counts from this many rounds after the round that first saw it labelled (met or not: ⌈reference-cap / labels per request⌉ − 1)", "an integer from 0 to 20",
			func(c *Config) *int { return &c.Standard.Lag }, func(x int) bool { return x >= 0 && x <= 20 }),
		integer("batch", "size of the next batch", "an integer ≥ 1",
			func(c *Config) *int { return &c.Batch }, func(x int) bool { return x >= 1 }),
		sharesKey(),
		choice("strategy", "model-unsure score", []string{"entropy", "margin", "least-confidence", "committee"},
			func(c *Config) *string { return (*string)(&c.Strategy) }),
		choice("diversity", "spread model-unsure picks by greedy k-centre", []string{"off", "cosine", "euclidean"},
			func(c *Config) *string { return (*string)(&c.Diversity) }),
		num("density", "weight model-unsure scores by information density to this power (0: off)", "a number ≥ 0",
			func(c *Config) *float64 { return &c.Beta }, func(x float64) bool { return x >= 0 }),
		flag("balanced", "spread model-unsure picks over the predicted classes", func(c *Config) *bool { return &c.Balanced }, false),
		choice("learner", "the classifier (auto: logistic for text, forest for images)", []string{"auto", "logistic", "bayes", "forest"},
			func(c *Config) *string { return &c.Train.Learner }),
		choice("features", "which items to train on (auto: the kind most items have)", []string{"auto", "text", "image"},
			func(c *Config) *string { return (*string)(&c.Train.Kind) }),
		num("lambda", "logistic regression's L2 penalty λ = 1/C", "a number > 0",
			func(c *Config) *float64 { return &c.Train.Lambda }, func(x float64) bool { return x > 0 }),
		integer("folds", "cross-validation folds (items of one parent stay together)", "an integer from 2 to 20",
			func(c *Config) *int { return &c.Train.Folds }, func(x int) bool { return x >= 2 && x <= 20 }),
		methodKey(),
		text("debias", "correct a bias shared by everyone that depends on this covariate", func(c *Config) *string { return &c.Consensus.Debias }),
		text("reference-stratum", "the covariate value taken as unbiased when there is no gold", func(c *Config) *string { return &c.Consensus.Reference }),
		flag("cleaning", "apply the cleaning rules at all", func(c *Config) *bool { return &c.Consensus.NoCleaning }, true),
		flag("first-only", "keep only each annotator's first label on an item", func(c *Config) *bool { return &c.Consensus.Rules.FirstOnly }, false),
		flag("repeat-offenders", "drop annotators who labelled many items many times", func(c *Config) *bool { return &c.Consensus.Rules.RepeatOffenders }, false),
		integer("repeat-items", "repeat offenders: more than this many items…", "an integer ≥ 0",
			func(c *Config) *int { return &c.Consensus.Rules.RepeatItems }, func(x int) bool { return x >= 0 }),
		integer("repeat-times", "…each labelled more than this many times", "an integer ≥ 1",
			func(c *Config) *int { return &c.Consensus.Rules.RepeatTimes }, func(x int) bool { return x >= 1 }),
		flag("gold-screen", "drop annotators who do badly on gold items", func(c *Config) *bool { return &c.Consensus.Rules.GoldScreen }, false),
		num("gold-min-accuracy", "gold screening: drop annotators below this accuracy on gold…", "a number in [0, 1]",
			func(c *Config) *float64 { return &c.Consensus.Rules.GoldMinAccuracy }, func(x float64) bool { return x >= 0 && x <= 1 }),
		integer("gold-min-items", "…once they answered at least this many gold items", "an integer ≥ 1",
			func(c *Config) *int { return &c.Consensus.Rules.GoldMinItems }, func(x int) bool { return x >= 1 }),
		num("min-seconds", "drop labels given in under this many seconds (0: off)", "a number ≥ 0",
			func(c *Config) *float64 { return &c.Consensus.Rules.MinSeconds }, func(x float64) bool { return x >= 0 }),
		flag("straight-lining", "flag annotators who give one class to nearly everything", func(c *Config) *bool { return &c.Consensus.Rules.StraightLining }, false),
		flag("drop-spammers", "drop annotators whose answers hardly depend on the item (spammer score below spammer-below)", func(c *Config) *bool { return &c.Consensus.Rules.Spammers }, false),
		num("spammer-below", "spammer rule: drop annotators whose spammer score is below this…", "a number in (0, 1)",
			func(c *Config) *float64 { return &c.Consensus.Rules.SpammerBelow }, func(x float64) bool { return x > 0 && x < 1 }),
		integer("spammer-min-labels", "…once they gave at least this many labels", "an integer ≥ 1",
			func(c *Config) *int { return &c.Consensus.Rules.SpammerMinLabels }, func(x int) bool { return x >= 1 }),
		integer("stop-set", "size of the fixed random stop set of the stop rule", "an integer ≥ 1",
			func(c *Config) *int { return &c.StopSet }, func(x int) bool { return x >= 1 }),
		seedKey(),
	}
	// min-seconds turns the too-fast rule on or off.
	for _, k := range keys {
		if k.Name == "min-seconds" {
			set := k.set
			k.set = func(c *Config, v string) error {
				if err := set(c, v); err != nil {
					return err
				}
				c.Consensus.Rules.TooFast = c.Consensus.Rules.MinSeconds > 0
				return nil
			}
			k.get = func(c *Config) string {
				if !c.Consensus.Rules.TooFast {
					return "0"
				}
				return fmtFloat(c.Consensus.Rules.MinSeconds)
			}
		}
	}
}

func sharesKey() *Key {
	var names []string
	for _, r := range selector.Reasons {
		if r != selector.ReasonAudit {
			names = append(names, string(r))
		}
	}
	k := &Key{Name: "shares", Doc: "split of the batch over the reasons; slots a reason cannot fill go to model-unsure",
		Want: "reason=share,… with reasons " + strings.Join(names, ", ") + " and shares ≥ 0, not all 0"}
	k.get = func(c *Config) string {
		var parts []string
		for _, r := range selector.Reasons {
			if v, ok := c.Shares[r]; ok {
				parts = append(parts, string(r)+"="+fmtFloat(v))
			}
		}
		return strings.Join(parts, ",")
	}
	k.set = func(c *Config, v string) error {
		m, err := ParseShares(v)
		if err != nil {
			return &SettingError{Key: k.Name, Value: v, Want: k.Want + " (" + err.Error() + ")"}
		}
		c.Shares = m
		return nil
	}
	return k
}

// ParseShares reads "reason=share,…" (e.g. "model-unsure=0.7,held-out=0.3").
func ParseShares(v string) (map[selector.Reason]float64, error) {
	m := map[selector.Reason]float64{}
	tot := 0.0
	for _, kv := range strings.Split(v, ",") {
		name, val, ok := strings.Cut(strings.TrimSpace(kv), "=")
		r := selector.Reason(strings.TrimSpace(name))
		if !ok {
			return nil, fmt.Errorf("%q is not reason=share", kv)
		}
		if !slices.Contains(selector.Reasons, r) || r == selector.ReasonAudit {
			return nil, fmt.Errorf("no reason %q", r)
		}
		x, good := parseFloat(val)
		if !good || x < 0 {
			return nil, fmt.Errorf("share %q of %s is not a number ≥ 0", val, r)
		}
		m[r] = x
		tot += x
	}
	if tot == 0 {
		return nil, errors.New("all shares are 0")
	}
	return m, nil
}

// methodKey is the consensus method: one of Methods or the default
// consensus's method, whichever that is.
func methodKey() *Key {
	allowed := func() []string {
		m := slices.Clone(Methods)
		if d := DefaultConsensus().Method; d != "" && !slices.Contains(m, d) {
			m = append([]string{d}, m...)
		}
		return m
	}
	k := &Key{Name: "method", Doc: "consensus method (default: " + DefaultConsensus().Method + ")", Want: "one of " + strings.Join(allowed(), ", ")}
	k.get = func(c *Config) string {
		if c.Consensus.Method == "" {
			return DefaultConsensus().Method
		}
		return c.Consensus.Method
	}
	k.set = func(c *Config, v string) error {
		v = strings.TrimSpace(v)
		if !slices.Contains(allowed(), v) {
			return bad(k, v)
		}
		c.Consensus.Method = v
		return nil
	}
	return k
}

func seedKey() *Key {
	k := &Key{Name: "seed", Doc: "seed of every random choice (folds, held-out hash, picks, bootstrap)", Want: "an integer ≥ 0"}
	k.get = func(c *Config) string { return strconv.FormatUint(c.Seed, 10) }
	k.set = func(c *Config, v string) error {
		x, err := strconv.ParseUint(strings.TrimSpace(v), 10, 64)
		if err != nil {
			return bad(k, v)
		}
		c.Seed = x
		return nil
	}
	return k
}

// Keys returns the documented settings in display order.
func Keys() []Key {
	out := make([]Key, len(keys))
	for i, k := range keys {
		out[i] = *k
	}
	return out
}

func keyNamed(name string) (*Key, error) {
	for _, k := range keys {
		if k.Name == name {
			return k, nil
		}
	}
	var names []string
	for _, k := range keys {
		names = append(names, k.Name)
	}
	return nil, &SettingError{Key: name, Value: "", Want: "a known key: " + strings.Join(names, ", ")}
}

// Set changes the setting named key to value, checking it against the
// key's range; an unknown key or a value out of range is a *SettingError.
func (c *Config) Set(key, value string) error {
	k, err := keyNamed(key)
	if err != nil {
		return err
	}
	return k.set(c, value)
}

// Get returns the value of the setting named key as `loop config` shows it.
func (c *Config) Get(key string) (string, error) {
	k, err := keyNamed(key)
	if err != nil {
		return "", err
	}
	return k.get(c), nil
}

// Validate checks every setting against its key's range (a *SettingError
// names the first one outside it), after filling zero values with defaults.
func (c *Config) Validate() error {
	c.defaults()
	for _, k := range keys {
		v := k.get(c)
		probe := *c
		probe.Shares = c.Shares
		if err := k.set(&probe, v); err != nil {
			return err
		}
	}
	for r, s := range c.Shares {
		if !slices.Contains(selector.Reasons, r) || math.IsNaN(s) || s < 0 || math.IsInf(s, 0) {
			return &SettingError{Key: "shares", Value: fmt.Sprintf("%s=%v", r, s), Want: "known reasons with shares ≥ 0"}
		}
	}
	return nil
}

// Override is one setting changed for one run (a command-line flag).
type Override struct{ Key, Value string }

// settingsState is where the project keeps the keys it was given.
const settingsState = "settings"

// storedKeys reads the keys the project was given (nil when none).
func storedKeys(raw []byte) (map[string]string, error) {
	if raw == nil {
		return nil, nil
	}
	var m map[string]string
	if err := json.Unmarshal(raw, &m); err != nil {
		return nil, fmt.Errorf("reading the project's settings: %w", err)
	}
	return m, nil
}

// configFrom builds the settings: the defaults, then the stored keys, then
// the overrides (in order). It returns the settings and each key's value
// with its source ("default", "stored" or "flag"), in display order.
func configFrom(stored map[string]string, over []Override) (Config, []verdict.Setting, error) {
	c := DefaultConfig()
	src := map[string]string{}
	names := make([]string, 0, len(stored))
	for k := range stored {
		names = append(names, k)
	}
	sort.Strings(names)
	for _, k := range names {
		if err := c.Set(k, stored[k]); err != nil {
			return c, nil, fmt.Errorf("the project's stored settings: %w (change it with `loop config DIR set`)", err)
		}
		src[k] = "stored"
	}
	for _, o := range over {
		if err := c.Set(o.Key, o.Value); err != nil {
			return c, nil, err
		}
		src[o.Key] = "flag"
	}
	if err := c.Validate(); err != nil {
		return c, nil, err
	}
	return c, describe(&c, src), nil
}

// describe lists every key with its value and source.
func describe(c *Config, src map[string]string) []verdict.Setting {
	out := make([]verdict.Setting, 0, len(keys))
	for _, k := range keys {
		s := src[k.Name]
		if s == "" {
			s = "default"
		}
		out = append(out, verdict.Setting{Key: k.Name, Value: k.get(c), Source: s})
	}
	return out
}

// given lists every key of a config given whole by a caller.
func given(c *Config) []verdict.Setting {
	out := describe(c, nil)
	for i := range out {
		out[i].Source = "given"
	}
	return out
}

// Settings returns the project's settings — the defaults with the stored
// keys applied, then over (settings changed for one run, in order) — and
// each key with its value and source.
func Settings(st *store.Store, over ...Override) (Config, []verdict.Setting, error) {
	raw, err := st.State(settingsState)
	if err != nil && !errors.Is(err, store.ErrNotFound) {
		return Config{}, nil, err
	}
	m, err := storedKeys(raw)
	if err != nil {
		return Config{}, nil, err
	}
	return configFrom(m, over)
}

// SetSettings stores the given keys as the project's settings (each checked
// against its range first; a bad one changes nothing) and records the change
// in the audit trail. It returns the changes as "key old → new".
func SetSettings(st *store.Store, set []Override, source string) ([]string, error) {
	raw, err := st.State(settingsState)
	if err != nil && !errors.Is(err, store.ErrNotFound) {
		return nil, err
	}
	m, err := storedKeys(raw)
	if err != nil {
		return nil, err
	}
	if m == nil {
		m = map[string]string{}
	}
	before, _, err := configFrom(m, nil)
	if err != nil {
		return nil, err
	}
	var changes []string
	for _, o := range set {
		c := before
		if err := c.Set(o.Key, o.Value); err != nil {
			return nil, err
		}
		if err := c.Validate(); err != nil {
			return nil, err
		}
		norm, _ := c.Get(o.Key)
		old, _ := before.Get(o.Key)
		m[o.Key] = norm
		changes = append(changes, fmt.Sprintf("%s %s → %s", o.Key, old, norm))
		if before, _, err = configFrom(m, nil); err != nil {
			return nil, err
		}
	}
	b, err := json.Marshal(m)
	if err != nil {
		return nil, err
	}
	if err := st.PutStates(map[string][]byte{settingsState: b}, "settings.set", strings.Join(changes, "; "), source); err != nil {
		return nil, err
	}
	return changes, nil
}

// kindOf returns the configured kind, or the project's.
func (c *Config) kindOf(p *project) handoff.Kind {
	if c.Train.Kind != "" {
		return c.Train.Kind
	}
	return projectKind(p)
}

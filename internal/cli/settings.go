package cli

import (
	"errors"
	"fmt"
	"strings"

	"github.com/spf13/cobra"

	"handoff/round"
	"handoff/store"
)

// A settings flag overrides one of the project's stored settings (see
// `loop config`) for one run. Its value is checked by the settings type
// (round.Config.Set), so a value out of range is a usage error (exit 2)
// exactly as `loop config DIR set` refuses it.
type settingFlag struct {
	flag, short, key string
}

// valueFlags are the flags that give a setting's value.
var valueFlags = []settingFlag{
	{"max-error", "", "max-error"}, {"confidence", "", "confidence"},
	{"median-gate", "", "median-gate"}, {"require-stable", "", "require-stable"},
	{"held-out", "", "held-out"}, {"held-out-min", "", "held-out-min"},
	{"reference-level", "", "reference-level"}, {"reference-cap", "", "reference-cap"},
	{"n", "n", "batch"}, {"shares", "", "shares"}, {"strategy", "", "strategy"},
	{"diversity", "", "diversity"}, {"density", "", "density"}, {"balanced", "", "balanced"},
	{"learner", "", "learner"}, {"features", "", "features"}, {"lambda", "", "lambda"}, {"folds", "", "folds"},
	{"method", "", "method"}, {"debias", "", "debias"}, {"reference-stratum", "", "reference-stratum"},
	{"repeat-items", "", "repeat-items"}, {"repeat-times", "", "repeat-times"},
	{"gold-min-accuracy", "", "gold-min-accuracy"}, {"gold-min-items", "", "gold-min-items"},
	{"min-seconds", "", "min-seconds"}, {"drop-spammers", "", "drop-spammers"},
	{"spammer-below", "", "spammer-below"}, {"spammer-min-labels", "", "spammer-min-labels"}, {"seed", "", "seed"},
}

// offFlags are switches that turn a setting off.
var offFlags = []struct{ flag, key, usage string }{
	{"keep-repeats", "first-only", "keep every label an annotator gave an item (setting first-only off)"},
	{"no-repeat-offenders", "repeat-offenders", "keep annotators who labelled many items many times (setting repeat-offenders off)"},
	{"no-gold-screen", "gold-screen", "keep annotators who do badly on gold items (setting gold-screen off)"},
	{"no-straight-lining", "straight-lining", "do not flag annotators who give one class to nearly everything (setting straight-lining off)"},
	{"no-cleaning", "cleaning", "apply no cleaning rule at all (setting cleaning off)"},
}

// BindSettings adds the flags for the named setting keys to c (all of them
// when keys is empty), each documented with its key, range and built-in
// default.
func BindSettings(c *cobra.Command, keys ...string) {
	want := func(k string) bool {
		if len(keys) == 0 {
			return true
		}
		for _, x := range keys {
			if x == k {
				return true
			}
		}
		return false
	}
	def := round.DefaultConfig()
	docs := map[string]round.Key{}
	for _, k := range round.Keys() {
		docs[k.Name] = k
	}
	fl := c.Flags()
	for _, f := range valueFlags {
		if !want(f.key) {
			continue
		}
		k := docs[f.key]
		d, _ := def.Get(f.key)
		usage := fmt.Sprintf("%s: %s (for this run; stored setting %s, built-in default %s)", k.Doc, k.Want, f.key, d)
		if f.short != "" {
			fl.StringP(f.flag, f.short, "", usage)
		} else {
			fl.String(f.flag, "", usage)
		}
		if strings.HasPrefix(k.Want, "on or off") {
			fl.Lookup(f.flag).NoOptDefVal = "on"
		}
	}
	for _, f := range offFlags {
		if want(f.key) {
			fl.Bool(f.flag, false, f.usage)
		}
	}
}

// overrides returns the settings the command line changes for this run, in
// flag order.
func overrides(cmd *cobra.Command) []round.Override {
	var out []round.Override
	fl := cmd.Flags()
	for _, f := range valueFlags {
		if x := fl.Lookup(f.flag); x != nil && x.Changed {
			out = append(out, round.Override{Key: f.key, Value: x.Value.String()})
		}
	}
	for _, f := range offFlags {
		if x := fl.Lookup(f.flag); x != nil && x.Changed && x.Value.String() == "true" {
			out = append(out, round.Override{Key: f.key, Value: "off"})
		}
	}
	return out
}

// Overrides returns the command line's settings after checking each
// value against its range (a usage error, exit 2, names the first bad one),
// before anything is opened.
func Overrides(cmd *cobra.Command) ([]round.Override, error) {
	over := overrides(cmd)
	probe := round.DefaultConfig()
	for _, o := range over {
		if err := probe.Set(o.Key, o.Value); err != nil {
			return nil, SettingUsage(fmt.Errorf("--%s: %w", FlagOf(o.Key), err))
		}
	}
	return over, nil
}

func FlagOf(key string) string {
	for _, f := range valueFlags {
		if f.key == key {
			return f.flag
		}
	}
	for _, f := range offFlags {
		if f.key == key {
			return f.flag
		}
	}
	return key
}

// SettingUsage turns a setting out of range or an unknown question into
// a usage error (exit 2).
func SettingUsage(err error) error {
	var se *round.SettingError
	var uq *round.UnknownQuestion
	if errors.As(err, &se) || errors.As(err, &uq) {
		return Usagef("%v", err)
	}
	return err
}

// CleaningKeys are the settings of the cleaning rules.
var CleaningKeys = []string{"cleaning", "first-only", "repeat-offenders", "repeat-items", "repeat-times", "gold-screen", "gold-min-accuracy", "gold-min-items", "min-seconds", "straight-lining", "drop-spammers", "spammer-below", "spammer-min-labels"}

// TrainKeys are the settings of the training.
var TrainKeys = []string{"learner", "features", "lambda", "folds", "seed"}

// ProjectConfig returns the project's settings with the command line's
// (checkedOverrides) applied for this run.
func ProjectConfig(s *store.Store, over []round.Override) (round.Config, error) {
	c, _, err := round.Settings(s, over...)
	return c, SettingUsage(err)
}

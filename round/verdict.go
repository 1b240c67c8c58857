package round

import (
	"slices"

	"handoff/store"
	"handoff/verdict"
)

// VerdictConfig changes verdict settings for one report (max-error,
// confidence, median-gate, require-stable); none means the latest round's.
type VerdictConfig struct {
	Overrides []Override
}

// verdictKeys are the settings Verdict may override.
var verdictKeys = []string{"max-error", "confidence", "median-gate", "require-stable"}

// verdictOf returns the verdict of the latest round, with the audit of
// machine labels as it stands now (the consensus recomputed in memory with
// the round's settings, so audit labels added since count). When cfg
// changes a setting, the whole verdict is computed again from the latest
// round's stored scores (no featurising) and the labels as they are now;
// the look stays the round's.
func verdictOf(st *store.Store, cfg VerdictConfig) (*verdict.Report, error) {
	for _, o := range cfg.Overrides {
		if !slices.Contains(verdictKeys, o.Key) {
			return nil, &SettingError{Key: o.Key, Value: o.Value, Want: "one of the verdict settings max-error, confidence, median-gate, require-stable"}
		}
		probe := DefaultConfig()
		if err := probe.Set(o.Key, o.Value); err != nil {
			return nil, err
		}
	}
	c, err := loadCurrent(st, false)
	if err != nil {
		return nil, err
	}
	r := c.r
	rc := r.Config
	settings := slices.Clone(r.Settings)
	changed := false
	for _, o := range cfg.Overrides {
		old, _ := rc.Get(o.Key)
		if err := rc.Set(o.Key, o.Value); err != nil {
			return nil, err
		}
		now, _ := rc.Get(o.Key)
		if now != old {
			changed = true
		}
		for i := range settings {
			if settings[i].Key == o.Key {
				settings[i].Value, settings[i].Source = now, "flag"
			}
		}
	}
	if err := rc.Validate(); err != nil {
		return nil, err
	}
	if !changed && len(c.s.Audit) == 0 {
		return r.Verdict, nil
	}
	cr, err := consensus(c.p, rc.Consensus)
	if err != nil {
		return nil, err
	}
	if !changed {
		return r.Verdict.WithAudit(auditCounts(c.p, cr, c.s, c.machine))
	}
	vin, err := verdictInput(c.p, cr, c.s, rc, c.sc.row, c.machine, max(r.Look, 1), r.Model, settings, nil)
	if err != nil {
		return nil, err
	}
	return verdict.Compute(vin.in, rc.Verdict)
}

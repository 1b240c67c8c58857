package round

import (
	"fmt"

	"handoff/crowd"
	"handoff/sim"
)

// PlanConfig is a planning question: for a described crowd, how accurate is
// the consensus with each method at each number of labels per item?
type PlanConfig struct {
	Spec          sim.CrowdSpec // LabelsPerItem is ignored; see LabelsPerItem below
	LabelsPerItem []int         // the redundancies to compare
	Methods       []string      // combining methods (nil: majority, one-coin, dawid-skene, hierarchical, auto)
	Seeds         int           // simulated projects per cell (0 means 3)
	Seed          uint64
}

// PlanCell is the consensus accuracy of one method at one redundancy,
// averaged over the simulated projects, with the lowest and highest seen.
type PlanCell struct {
	LabelsPerItem int     `json:"labels_per_item"`
	Method        string  `json:"method"`
	Accuracy      float64 `json:"accuracy"`
	Min           float64 `json:"min"`
	Max           float64 `json:"max"`
	Labels        int     `json:"labels"` // labels the design needs: items × labels per item
	// Chosen lists the models the automatic choice (method auto) used
	// across the simulated projects.
	Chosen []string `json:"chosen,omitempty"`
}

func appendOnce(xs []string, x string) []string {
	for _, y := range xs {
		if y == x {
			return xs
		}
	}
	return append(xs, x)
}

// Plan simulates the described crowd (sim.CrowdSpec) and reports consensus
// accuracy against the simulated truth for each method and redundancy, so a
// team can choose its redundancy and budget before the project starts.
func Plan(cfg PlanConfig) ([]PlanCell, error) {
	if len(cfg.LabelsPerItem) == 0 {
		return nil, fmt.Errorf("plan: give at least one number of labels per item")
	}
	if cfg.Methods == nil {
		cfg.Methods = []string{crowd.MethodMajority, crowd.MethodOneCoin, crowd.MethodDawidSkene, crowd.MethodHierarchical, crowd.MethodAuto}
	}
	if cfg.Seeds <= 0 {
		cfg.Seeds = 3
	}
	var out []PlanCell
	for _, lpi := range cfg.LabelsPerItem {
		spec := cfg.Spec
		spec.LabelsPerItem = lpi
		if err := spec.Validate(); err != nil {
			return nil, fmt.Errorf("plan: %d labels per item: %w", lpi, err)
		}
		cells := make([]PlanCell, len(cfg.Methods))
		for m := range cells {
			cells[m] = PlanCell{LabelsPerItem: lpi, Method: cfg.Methods[m], Min: 1, Labels: spec.Items * lpi}
		}
		for s := range cfg.Seeds {
			l := &crowd.Labels{NItems: spec.Items, NAnnotators: spec.Annotators, NClasses: spec.Classes}
			truth, people, err := spec.Stream(cfg.Seed+uint64(s)*7919, func(item, ann, class int) {
				l.Item = append(l.Item, int32(item))
				l.Annotator = append(l.Annotator, int32(ann))
				l.Class = append(l.Class, uint8(class))
			})
			if err != nil {
				return nil, fmt.Errorf("plan: %w", err)
			}
			l.NAnnotators = len(people.Annotators) // a sparse crowd has as many as the labels needed
			if spec.Sparse() {
				// Resubmitters aside, the default cleaning keeps what a
				// sparse crowd gives; clean as a project would.
				if l, _, err = crowd.Clean(l, nil, crowd.DefaultRules()); err != nil {
					return nil, fmt.Errorf("plan: cleaning: %w", err)
				}
			}
			for m, method := range cfg.Methods {
				r, err := crowd.Combine(method, l, crowd.Options{Seed: cfg.Seed + uint64(s)})
				if err != nil {
					return nil, fmt.Errorf("plan: %s: %w", method, err)
				}
				if method == crowd.MethodAuto {
					cells[m].Chosen = appendOnce(cells[m].Chosen, r.Method)
				}
				right := 0
				for i, c := range r.Class {
					if c == truth[i] {
						right++
					}
				}
				acc := float64(right) / float64(len(truth))
				cells[m].Accuracy += acc / float64(cfg.Seeds)
				cells[m].Min = min(cells[m].Min, acc)
				cells[m].Max = max(cells[m].Max, acc)
			}
		}
		out = append(out, cells...)
	}
	return out, nil
}

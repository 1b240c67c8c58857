// Package plan answers what-if questions by simulation, before or beside
// the real rounds: how accurate a consensus a described crowd gives with
// each combining method and number of labels per item (Redundancy), and
// whether picking the items the model is unsure of beats random picks, on
// a data set with known classes (LearningCurve, CompareStrategies) or on a
// project's own consensus (ProjectCurves). Nothing here writes to a store;
// the figures are simulated, never held-out agreement.
package plan

import (
	"fmt"
	"strings"

	"handoff/crowd"
	"handoff/sim"
)

// RedundancyConfig is a planning question: for a described crowd, how accurate is
// the consensus with each method at each number of labels per item?
type RedundancyConfig struct {
	Spec          sim.CrowdSpec // LabelsPerItem is ignored; see LabelsPerItem below
	LabelsPerItem []int         // the redundancies to compare
	Methods       []string      // combining methods (nil: majority, one-coin, dawid-skene, hierarchical, auto)
	Seeds         int           // simulated projects per cell (0 means 3)
	Seed          uint64
}

// Cell is the consensus accuracy of one method at one redundancy,
// averaged over the simulated projects, with the lowest and highest seen.
type Cell struct {
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

// Redundancy simulates the described crowd (sim.CrowdSpec) and reports consensus
// accuracy against the simulated truth for each method and redundancy, so a
// team can choose its redundancy and budget before the project starts.
func Redundancy(cfg RedundancyConfig) ([]Cell, error) {
	if len(cfg.LabelsPerItem) == 0 {
		return nil, fmt.Errorf("plan: give at least one number of labels per item")
	}
	if cfg.Methods == nil {
		cfg.Methods = []string{crowd.MethodMajority, crowd.MethodOneCoin, crowd.MethodDawidSkene, crowd.MethodHierarchical, crowd.MethodAuto}
	}
	if cfg.Seeds <= 0 {
		cfg.Seeds = 3
	}
	var out []Cell
	for _, lpi := range cfg.LabelsPerItem {
		spec := cfg.Spec
		spec.LabelsPerItem = lpi
		if err := spec.Validate(); err != nil {
			return nil, fmt.Errorf("plan: %d labels per item: %w", lpi, err)
		}
		cells := make([]Cell, len(cfg.Methods))
		for m := range cells {
			cells[m] = Cell{LabelsPerItem: lpi, Method: cfg.Methods[m], Min: 1, Labels: spec.Items * lpi}
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

// RedundancyText is a redundancy plan as `loop simulate` prints it: the
// crowd described, then one line per redundancy and method with the mean
// accuracy and the lowest and highest seen (and, for auto, the models it
// chose).
func RedundancyText(cells []Cell, cfg RedundancyConfig) string {
	spec := cfg.Spec
	var b strings.Builder
	fmt.Fprintf(&b, "consensus accuracy against the simulated truth (mean of %d projects; min–max)\n", max(cfg.Seeds, 1))
	who := fmt.Sprintf("%d annotators", spec.Annotators)
	if spec.Sparse() {
		who = fmt.Sprintf("people giving %d–%d labels each", spec.MinLabels, spec.MaxLabels)
		if spec.OneClass > 0 {
			who += fmt.Sprintf(", %.0f%% of spammers always one class", 100*spec.OneClass)
		}
	}
	fmt.Fprintf(&b, "crowd: %.0f%% careful, %.0f%% average, %.0f%% careless, %.0f%% spammers; %s; %d items, %d classes\n",
		100*spec.Careful, 100*spec.Average, 100*spec.Careless, 100*spec.Spammer, who, spec.Items, spec.Classes)
	for _, sh := range spec.Shared {
		fmt.Fprintf(&b, "shared confusion: %s answered as %s %.0f%% of the time by all but the careful\n", sh.From, sh.To, 100*sh.Rate)
	}
	fmt.Fprintf(&b, "%-16s %-12s %-24s %s\n", "labels per item", "labels", "method", "accuracy")
	for _, c := range cells {
		m := c.Method
		if len(c.Chosen) > 0 {
			m += " → " + strings.Join(c.Chosen, ", ")
		}
		fmt.Fprintf(&b, "%-16d %-12d %-24s %.3f (%.3f–%.3f)\n", c.LabelsPerItem, c.Labels, m, c.Accuracy, c.Min, c.Max)
	}
	return b.String()
}

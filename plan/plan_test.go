package plan

import (
	"testing"

	"handoff/sim"
)

func TestPlanRedundancyHelps(t *testing.T) {
	cells, err := Redundancy(RedundancyConfig{
		Spec:          sim.CrowdSpec{Careful: 0.3, Average: 0.4, Careless: 0.1, Spammer: 0.2, Classes: 3, Items: 600, Annotators: 60},
		LabelsPerItem: []int{1, 5},
		Seeds:         2,
		Seed:          1,
	})
	if err != nil {
		t.Fatal(err)
	}
	acc := map[string]float64{}
	for _, c := range cells {
		acc[c.Method+"@"+string(rune('0'+c.LabelsPerItem))] = c.Accuracy
	}
	if acc["dawid-skene@5"] <= acc["majority@1"] || acc["dawid-skene@5"] < acc["majority@5"] {
		t.Errorf("plan accuracies %v: more labels and Dawid–Skene should help", acc)
	}
}

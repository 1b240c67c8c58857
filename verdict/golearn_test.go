package verdict

import (
	"math"
	"math/rand/v2"
	"strconv"
	"testing"

	"github.com/sjwhitworth/golearn/evaluation"

	"handoff/learner"
)

// TestScoresMatchGolearn checks the held-out agreement's accuracy and
// per-class precision, recall and F1 (Agree), and learner.AccuracyF1's
// macro-F1, against golearn's evaluation package (golearn
// v0.0.0-20221228163002-74ae077eafb2: GetAccuracy, GetPrecision, GetRecall,
// GetF1Score on the same confusion matrix) on seeded random classes,
// every class present in the reference.
func TestScoresMatchGolearn(t *testing.T) {
	for _, c := range []struct {
		n, k int
		hit  float64 // chance that the machine copies the reference
		seed uint64
	}{{200, 2, 0.8, 1}, {500, 4, 0.6, 2}, {300, 7, 0.9, 3}} {
		rng := rand.New(rand.NewPCG(c.seed, 7))
		truth, pred := make([]int, c.n), make([]int, c.n)
		classes := make([]string, c.k)
		for j := range classes {
			classes[j] = "c" + strconv.Itoa(j)
		}
		cm := evaluation.ConfusionMatrix{}
		for i := range truth {
			truth[i] = i % c.k
			pred[i] = truth[i]
			if rng.Float64() > c.hit {
				pred[i] = rng.IntN(c.k)
			}
			a, b := classes[truth[i]], classes[pred[i]]
			if cm[a] == nil {
				cm[a] = map[string]int{}
			}
			cm[a][b]++
		}
		ag, err := Agree(truth, pred, classes, 20, 0.95, 1)
		if err != nil {
			t.Fatal(err)
		}
		near := func(what string, got, want float64) {
			if math.Abs(got-want) > 1e-12 {
				t.Errorf("n %d, k %d: %s = %v, golearn %v", c.n, c.k, what, got, want)
			}
		}
		near("accuracy", ag.Accuracy.Est, evaluation.GetAccuracy(cm))
		macro := 0.0
		for j, cs := range ag.Classes {
			near(cs.Class+" precision", cs.Precision.Est, evaluation.GetPrecision(cs.Class, cm))
			near(cs.Class+" recall", cs.Recall.Est, evaluation.GetRecall(cs.Class, cm))
			near(cs.Class+" F1", cs.F1, evaluation.GetF1Score(classes[j], cm))
			macro += evaluation.GetF1Score(classes[j], cm) / float64(c.k)
		}
		near("macro-F1", ag.MacroF1.Est, macro)
		acc, f1 := learner.AccuracyF1(truth, pred, c.k)
		near("learner accuracy", acc, evaluation.GetAccuracy(cm))
		near("learner macro-F1", f1, macro)
	}
}

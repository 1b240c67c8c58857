//go:build cgo

// golearn's k-nearest neighbours needs cgo (its Euclidean distance is C),
// so this comparison builds only where cgo does.

package learner

import (
	"strconv"
	"testing"

	"github.com/sjwhitworth/golearn/base"
	"github.com/sjwhitworth/golearn/evaluation"
	"github.com/sjwhitworth/golearn/knn"

	"handoff/features"
	"handoff/internal/fixtures"
)

// golearnLayout is the attributes of a golearn data set: one float
// attribute per column and a categorical class. Training and test sets
// must share one layout (golearn compares the attributes themselves).
type golearnLayout struct {
	cols []base.Attribute
	cls  *base.CategoricalAttribute
}

func newGolearnLayout(d int) golearnLayout {
	l := golearnLayout{cols: make([]base.Attribute, d), cls: base.NewCategoricalAttribute()}
	for j := range l.cols {
		l.cols[j] = base.NewFloatAttribute("x" + strconv.Itoa(j))
	}
	l.cls.SetName("digit")
	return l
}

// instances lays rows and classes out as golearn's DenseInstances.
func (l golearnLayout) instances(rows [][]float64, y []int) *base.DenseInstances {
	inst := base.NewDenseInstances()
	specs := make([]base.AttributeSpec, len(l.cols))
	for j, a := range l.cols {
		specs[j] = inst.AddAttribute(a)
	}
	cs := inst.AddAttribute(l.cls)
	if err := inst.AddClassAttribute(l.cls); err != nil {
		panic(err)
	}
	inst.Extend(len(rows))
	for i, r := range rows {
		for j, v := range r {
			inst.Set(specs[j], i, base.PackFloatToBytes(v))
		}
		inst.Set(cs, i, l.cls.GetSysValFromString(strconv.Itoa(y[i])))
	}
	return inst
}

// TestGolearnKNNOnDigits measures golearn's k-nearest neighbours (golearn
// v0.0.0-20221228163002-74ae077eafb2, Euclidean, linear search) against our
// learners on the UCI digits (Alpaydin & Kaynak 1998; testdata/digits.csv.gz)
// on the same five folds (GroupKFold, seed 1), accuracy pooled over the
// folds by golearn's evaluation package: on the raw 8×8 pixels, where
// simple classifiers reach about 0.95–0.98 (common practice, no source),
// and on the project's image path, the hand-crafted features of the digits
// drawn as 128×128 images. Measured (README.md, "What we wrote
// ourselves"): on raw pixels golearn's 1-NN (0.986) and 3-NN (0.988) beat
// our forest (0.973); on the image features our forest (0.960) beats
// golearn's 1-NN (0.939). golearn's neighbours predict a class, not
// probabilities, take neither soft targets nor row weights, and break a
// tied vote by Go's map order (not reproducible), so they do not stand
// behind our Learner interface, which needs calibrated probabilities for
// the threshold and the selector. The floors guard the measurement.
func TestGolearnKNNOnDigits(t *testing.T) {
	if testing.Short() {
		t.Skip("cross-validates five learners on 1,797 digits")
	}
	pixels, y := fixtures.Digits(t)
	folds, err := GroupKFold(len(y), nil, 5, 1)
	if err != nil {
		t.Fatal(err)
	}
	inFold := make([]int, len(y))
	for f, rows := range folds {
		for _, i := range rows {
			inFold[i] = f
		}
	}
	knnAccuracy := func(pixels [][]float64, k int) float64 {
		layout := newGolearnLayout(len(pixels[0]))
		cm := evaluation.ConfusionMatrix{}
		for f := range folds {
			var trX, teX [][]float64
			var trY, teY []int
			for i := range y {
				if inFold[i] == f {
					teX, teY = append(teX, pixels[i]), append(teY, y[i])
				} else {
					trX, trY = append(trX, pixels[i]), append(trY, y[i])
				}
			}
			c := knn.NewKnnClassifier("euclidean", "linear", k)
			if err := c.Fit(layout.instances(trX, trY)); err != nil {
				t.Fatal(err)
			}
			test := layout.instances(teX, teY)
			pred, err := c.Predict(test)
			if err != nil {
				t.Fatal(err)
			}
			m, err := evaluation.GetConfusionMatrix(test, pred)
			if err != nil {
				t.Fatal(err)
			}
			for a, row := range m {
				if cm[a] == nil {
					cm[a] = map[string]int{}
				}
				for b, n := range row {
					cm[a][b] += n
				}
			}
		}
		return evaluation.GetAccuracy(cm)
	}
	ours := func(X features.Matrix, l Learner) float64 {
		res, err := CrossValidate(l, X, oneHot(y, 10), nil, nil, 5, 1)
		if err != nil {
			t.Fatal(err)
		}
		return res.Accuracy
	}
	results := []struct {
		name  string
		acc   float64
		floor float64
	}{
		{"raw pixels: golearn 1-NN", knnAccuracy(pixels, 1), 0.95},
		{"raw pixels: golearn 3-NN", knnAccuracy(pixels, 3), 0.93},
		{"raw pixels: our forest (100 trees)", ours(dense(pixels), Forest{Trees: 100, Seed: 1}), 0.95},
		{"raw pixels: our logistic (λ = 0.01)", ours(dense(pixels), Logistic{Lambda: 0.01}), 0.93},
		{"raw pixels: our naive Bayes", ours(dense(pixels), Bayes{}), 0.80},
	}
	// The project's image path: hand-crafted features of the rendered
	// digits, standardised (over all rows: the nearest-neighbour rule
	// needs comparable columns).
	F, _ := digitImageFeatures(t)
	sc, err := features.FitScaler(F, nil)
	if err != nil {
		t.Fatal(err)
	}
	Fs, err := sc.Transform(F)
	if err != nil {
		t.Fatal(err)
	}
	rows := make([][]float64, Fs.Rows())
	for i := range rows {
		_, v := Fs.Row(i)
		rows[i] = append([]float64(nil), v...)
	}
	results = append(results, []struct {
		name  string
		acc   float64
		floor float64
	}{
		{"image features: golearn 1-NN", knnAccuracy(rows, 1), 0.90},
		{"image features: our forest (100 trees)", ours(F, Forest{Trees: 100, Seed: 1}), 0.90},
	}...)
	for _, r := range results {
		t.Logf("digits, 5-fold: %-40s accuracy %.4f", r.name, r.acc)
		if r.acc < r.floor {
			t.Errorf("%s: 5-fold accuracy %.4f below %.2f", r.name, r.acc, r.floor)
		}
	}
}

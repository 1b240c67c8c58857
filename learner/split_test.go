package learner

import (
	"fmt"
	"slices"
	"strings"
	"testing"
)

func TestGroupKFoldKeepsParentsTogether(t *testing.T) {
	n := 103
	groups := make([]string, n)
	for i := range groups {
		groups[i] = fmt.Sprintf("doc%d", (i*7)%23) // 23 parents of 4–5 rows
	}
	folds, err := GroupKFold(n, groups, 5, 42)
	if err != nil {
		t.Fatal(err)
	}
	seen := make([]int, n)
	foldOf := map[string]int{}
	for f, rows := range folds {
		if !slices.IsSorted(rows) {
			t.Errorf("fold %d not sorted", f)
		}
		if len(rows) < 15 || len(rows) > 26 {
			t.Errorf("fold %d has %d rows: unbalanced", f, len(rows))
		}
		for _, i := range rows {
			seen[i]++
			if g, ok := foldOf[groups[i]]; ok && g != f {
				t.Fatalf("parent %s in folds %d and %d", groups[i], g, f)
			}
			foldOf[groups[i]] = f
		}
	}
	for i, c := range seen {
		if c != 1 {
			t.Fatalf("row %d in %d folds", i, c)
		}
	}
	again, _ := GroupKFold(n, groups, 5, 42)
	if !slices.EqualFunc(folds, again, slices.Equal[[]int]) {
		t.Error("same seed, different folds")
	}
	other, _ := GroupKFold(n, groups, 5, 43)
	if slices.EqualFunc(folds, other, slices.Equal[[]int]) {
		t.Error("different seeds, same folds")
	}
	if _, err := GroupKFold(4, []string{"a", "a", "b", "b"}, 3, 1); err == nil {
		t.Error("2 groups into 3 folds: want an error")
	}
}

func TestGroupSplit(t *testing.T) {
	n := 200
	groups := make([]string, n)
	for i := range groups {
		groups[i] = fmt.Sprint(i / 4)
	}
	tr, va, err := GroupSplit(n, groups, 0.2, 5)
	if err != nil {
		t.Fatal(err)
	}
	if len(va) != 40 || len(tr) != 160 {
		t.Errorf("split %d/%d, want 160/40", len(tr), len(va))
	}
	in := map[string]bool{}
	for _, i := range va {
		in[groups[i]] = true
	}
	for _, i := range tr {
		if in[groups[i]] {
			t.Fatalf("parent %s on both sides", groups[i])
		}
	}
	tr2, va2, _ := GroupSplit(n, nil, 0.2, 5)
	if len(tr2)+len(va2) != n || len(va2) != 40 {
		t.Errorf("ungrouped split %d/%d", len(tr2), len(va2))
	}
	for _, f := range []float64{0, 1, -0.1} {
		if _, _, err := GroupSplit(n, groups, f, 1); err == nil {
			t.Errorf("valFrac %v: want an error", f)
		}
	}
}

// scikit-learn's f1_score(average="macro") on y_true = [0,1,2,0,1,2],
// y_pred = [0,2,1,0,0,1] is 0.26666… (its documentation example).
func TestAccuracyF1MatchesSklearnDocExample(t *testing.T) {
	acc, f1 := AccuracyF1([]int{0, 1, 2, 0, 1, 2}, []int{0, 2, 1, 0, 0, 1}, 3)
	if acc != 2.0/6 {
		t.Errorf("accuracy %v, want 1/3", acc)
	}
	if d := f1 - 0.26666666666666666; d > 1e-12 || d < -1e-12 {
		t.Errorf("macro F1 %v, want 0.2667", f1)
	}
}

func TestCrossValidateIris(t *testing.T) {
	recs := readCSV(t, "../testdata/learner/iris.csv")
	var rows [][]float64
	var y []int
	for _, r := range recs {
		rows = append(rows, []float64{atof(t, r[0]), atof(t, r[1]), atof(t, r[2]), atof(t, r[3])})
		y = append(y, int(atof(t, r[4])))
	}
	res, err := CrossValidate(Logistic{Lambda: 1}, dense(rows), oneHot(y, 3), nil, nil, 5, 1)
	if err != nil {
		t.Fatal(err)
	}
	// Iris is nearly separable; 5-fold accuracy of L2 logistic regression
	// is about 0.96–0.97 (common practice, no source).
	if res.Accuracy < 0.93 || res.MacroF1 < 0.93 || res.ECE > 0.15 || len(res.Proba) != 150 {
		t.Errorf("cross-validation: %+v", res)
	}
	finiteModel(t, res.Proba)
}

// TestCrossValidateFoldWithoutAClass: when every row of a class sits in one
// group, the fold that holds that group out trains without the class; its
// model gives the class probability 0, and a fold left with one class is
// an error that names the fold.
func TestCrossValidateFoldWithoutAClass(t *testing.T) {
	var rows [][]float64
	var y []int
	var groups []string
	for i := range 30 {
		c := i % 3
		if i >= 24 {
			c = 2
		}
		if c == 2 && i < 24 {
			c = i % 2
		}
		rows = append(rows, []float64{float64(c) + 0.1*float64(i%5), float64(i % 7)})
		y = append(y, c)
		g := string(rune('a' + i%4))
		if c == 2 {
			g = "only-class-2"
		}
		groups = append(groups, g)
	}
	res, err := CrossValidate(Logistic{Lambda: 1}, dense(rows), oneHot(y, 3), nil, groups, 3, 1)
	if err != nil {
		t.Fatal(err)
	}
	for i, c := range y {
		if c == 2 && res.Proba[i][2] != 0 {
			t.Errorf("row %d of class 2, held out with its whole class: p = %v, want 0 for the unseen class", i, res.Proba[i])
		}
	}
	two := oneHot([]int{0, 0, 0, 0, 1, 1}, 2)
	_, err = CrossValidate(Logistic{Lambda: 1}, dense([][]float64{{0}, {0}, {0}, {0}, {1}, {1}}), two, nil, []string{"a", "a", "a", "a", "b", "b"}, 2, 1)
	if err == nil || !strings.Contains(err.Error(), "fold") || !strings.Contains(err.Error(), "one class") {
		t.Errorf("a fold with one class: %v, want an error naming the fold", err)
	}
}

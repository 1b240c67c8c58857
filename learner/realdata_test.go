package learner

import (
	"bufio"
	"bytes"
	"encoding/json"
	"image/png"
	"os"
	"sort"
	"strconv"
	"testing"

	"gonum.org/v1/gonum/floats"

	"handoff/features"
	"handoff/internal/fixtures"
)

// readJSONL reads the text and label fields of a JSON-lines file.
func readJSONL(t *testing.T, path, textField, labelField string) (ids, texts []string, labels []int, keys []string) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var raw []string
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	for sc.Scan() {
		var rec map[string]any
		if err := json.Unmarshal(sc.Bytes(), &rec); err != nil {
			t.Fatal(err)
		}
		ids = append(ids, rec["id"].(string))
		texts = append(texts, rec[textField].(string))
		raw = append(raw, rec[labelField].(string))
	}
	at := map[string]int{}
	for _, l := range raw {
		at[l] = 0
	}
	for l := range at {
		keys = append(keys, l)
	}
	sort.Strings(keys)
	for i, k := range keys {
		at[k] = i
	}
	for _, l := range raw {
		labels = append(labels, at[l])
	}
	return ids, texts, labels, keys
}

func pick[T any](xs []T, rows []int) []T {
	out := make([]T, len(rows))
	for i, r := range rows {
		out[i] = xs[r]
	}
	return out
}

// Floors measured by us with scikit-learn 1.2.1 (Debian 12) as the
// peer (TF-IDF word 1–2-grams, sublinear tf, min_df 2, LogisticRegression
// C = 10 on a seeded 80/20 split): pkgdesc.jsonl 0.753, appdesc.jsonl 0.671
// (testdata/README.md).
// Data: Debian 12 package index and AppStream metadata (testdata/README.md).
// On sets this small the split moves accuracy by ±0.05, so we use the
// peer's own split: testdata/learner/textsplits.json lists the test ids of
// scikit-learn's train_test_split(test_size=0.2, random_state=0,
// stratify=labels) and the peer's accuracy on it (0.7647 and 0.6710). We
// must reach both the floor and the peer's figure − 0.005.
func TestTextAccuracyFloors(t *testing.T) {
	var splits struct {
		Splits map[string]struct {
			Peer float64  `json:"peer_accuracy"`
			Test []string `json:"test_ids"`
		}
	}
	b, err := os.ReadFile("../testdata/learner/textsplits.json")
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &splits); err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		file, text, label string
		floor             float64
	}{
		{"pkgdesc.jsonl", "text", "section", 0.753},
		{"appdesc.jsonl", "text", "category", 0.671},
	}
	for _, c := range cases {
		ids, texts, y, keys := readJSONL(t, "../testdata/"+c.file, c.text, c.label)
		sp := splits.Splits[c.file]
		isTest := map[string]bool{}
		for _, id := range sp.Test {
			isTest[id] = true
		}
		var tr, te []int
		for i, id := range ids {
			if isTest[id] {
				te = append(te, i)
			} else {
				tr = append(tr, i)
			}
		}
		if len(te) != len(sp.Test) || len(te) == 0 {
			t.Fatalf("%s: %d of %d test ids found", c.file, len(te), len(sp.Test))
		}
		cfg := features.DefaultTextConfig()
		cfg.MinDF = 2
		vec, err := cfg.Fit(pick(texts, tr))
		if err != nil {
			t.Fatal(err)
		}
		m, err := Logistic{Lambda: 0.1}.Fit(vec.Transform(pick(texts, tr)), oneHot(pick(y, tr), len(keys)), nil)
		if err != nil {
			t.Fatal(err)
		}
		p := m.PredictProba(vec.Transform(pick(texts, te)))
		hit := 0
		for i, r := range te {
			if floats.MaxIdx(p[i]) == y[r] {
				hit++
			}
		}
		acc := float64(hit) / float64(len(te))
		t.Logf("%s: %d train, %d test, %d classes: held-out accuracy %.4f (floor %.3f, peer on this split %.4f)", c.file, len(tr), len(te), len(keys), acc, c.floor, sp.Peer)
		if acc < c.floor || acc < sp.Peer-0.005 {
			t.Errorf("%s: held-out accuracy %.4f below the floor %.3f or the peer's %.4f − 0.005", c.file, acc, c.floor, sp.Peer)
		}
		// Temperature scaling (Guo et al. 2017): hold out a fifth of the
		// training rows, fit on the rest, fit T on the held-out fifth and
		// compare the expected calibration error on the test rows.
		if c.file == "pkgdesc.jsonl" {
			fit, val, err := GroupSplit(len(tr), nil, 0.2, 2)
			if err != nil {
				t.Fatal(err)
			}
			trFit, trVal := pick(tr, fit), pick(tr, val)
			vf, err := cfg.Fit(pick(texts, trFit))
			if err != nil {
				t.Fatal(err)
			}
			mf, err := Logistic{Lambda: 0.1}.Fit(vf.Transform(pick(texts, trFit)), oneHot(pick(y, trFit), len(keys)), nil)
			if err != nil {
				t.Fatal(err)
			}
			cm, cal, err := Calibrate(mf, vf.Transform(pick(texts, trVal)), oneHot(pick(y, trVal), len(keys)), nil)
			if err != nil {
				t.Fatal(err)
			}
			Xte := vf.Transform(pick(texts, te))
			before, after := ECE(mf.PredictProba(Xte), pick(y, te)), ECE(cm.PredictProba(Xte), pick(y, te))
			t.Logf("%s: temperature %.3f; validation ECE %.4f → %.4f, NLL %.4f → %.4f; test ECE %.4f → %.4f", c.file, cal.Temperature, cal.ECEBefore, cal.ECEAfter, cal.NLLBefore, cal.NLLAfter, before, after)
			if !(after < before) {
				t.Errorf("%s: temperature scaling did not lower the test ECE (%.4f → %.4f)", c.file, before, after)
			}
		}
		// Naive Bayes on the same features must at least be far above chance.
		nb, err := Bayes{Alpha: 0.1}.Fit(vec.Transform(pick(texts, tr)), oneHot(pick(y, tr), len(keys)), nil)
		if err != nil {
			t.Fatal(err)
		}
		q := nb.PredictProba(vec.Transform(pick(texts, te)))
		hit = 0
		for i, r := range te {
			if floats.MaxIdx(q[i]) == y[r] {
				hit++
			}
		}
		t.Logf("%s: naive Bayes held-out accuracy %.4f", c.file, float64(hit)/float64(len(te)))
	}
}

// Our target (common practice, no source): hand-crafted features of the rendered UCI digits (Alpaydin &
// Kaynak 1998; testdata/digits.csv.gz) must reach 0.90 accuracy in 5-fold
// cross-validation. Each 8×8 digit is drawn as a 128×128 grey PNG, decoded
// and featurised by package features, then a forest is cross-validated.
func TestDigitsImageFeaturesForestCV(t *testing.T) {
	if testing.Short() {
		t.Skip("renders and featurises 1,797 images")
	}
	X, y := digitImageFeatures(t)
	res, err := CrossValidate(Forest{Trees: 100, Seed: 1}, X, oneHot(y, 10), nil, nil, 5, 1)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("digits, %d image features, forest 5-fold: accuracy %.4f, macro-F1 %.4f, ECE %.4f", X.Cols(), res.Accuracy, res.MacroF1, res.ECE)
	if res.Accuracy < 0.90 {
		t.Errorf("5-fold accuracy %.4f below 0.90", res.Accuracy)
	}
}

// digitImageFeatures draws each UCI digit (fixtures.Digits) as a 128×128
// grey PNG, decodes it and computes the default image features.
func digitImageFeatures(t *testing.T) (*features.Dense, []int) {
	pixels, y := fixtures.Digits(t)
	names := make([]string, len(pixels))
	blobs := make([][]byte, len(pixels))
	for i, px := range pixels {
		var b bytes.Buffer
		if err := png.Encode(&b, features.RenderGray(px, 8, 8, 16)); err != nil {
			t.Fatal(err)
		}
		names[i], blobs[i] = "digit"+strconv.Itoa(i)+".png", b.Bytes()
	}
	X, err := features.DefaultImageConfig().TransformBytes(names, blobs)
	if err != nil {
		t.Fatal(err)
	}
	return X, y
}

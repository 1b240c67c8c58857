package features

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"strings"
	"testing"
)

func fit(t *testing.T, c TextConfig, texts []string) *TextVectorizer {
	t.Helper()
	v, err := c.Fit(texts)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// rowMap returns row i of m as column name → value.
func rowMap(v *TextVectorizer, m *CSR, i int) map[string]float64 {
	idx, val := m.Row(i)
	out := make(map[string]float64, len(idx))
	for k, j := range idx {
		out[v.Names()[j]] = val[k]
	}
	return out
}

func TestTermsTokenisation(t *testing.T) {
	tests := []struct {
		name string
		cfg  TextConfig
		in   string
		want []string
	}{
		{"punctuation dropped, UAX29 words kept whole",
			TextConfig{WordNGrams: [2]int{1, 1}},
			"Hello, World! Don't stop-believing: 3.14 …",
			[]string{"hello", "world", "don't", "stop", "believing", "3.14"}},
		{"full case folding",
			TextConfig{WordNGrams: [2]int{1, 1}},
			"Straße ΣΊΣΥΦΟΣ İstanbul ÉCOLE",
			[]string{"strasse", "σίσυφοσ", "i̇stanbul", "école"}},
		{"bigrams follow unigrams per position",
			TextConfig{WordNGrams: [2]int{1, 2}},
			"a b c",
			[]string{"a", "a b", "b", "b c", "c"}},
		{"bigrams only",
			TextConfig{WordNGrams: [2]int{2, 2}},
			"a b c",
			[]string{"a b", "b c"}},
		{"english stop words and Snowball stems",
			TextConfig{WordNGrams: [2]int{1, 1}, Language: "english", StopWords: true, Stem: true},
			"The runners were running to the generously sized houses",
			[]string{"runner", "run", "generous", "size", "hous"}},
		{"stop words removed before n-grams",
			TextConfig{WordNGrams: [2]int{2, 2}, Language: "english", StopWords: true},
			"cat of the hat",
			[]string{"cat hat"}},
		{"character n-grams within padded words (scikit-learn char_wb)",
			TextConfig{CharNGrams: [2]int{3, 4}},
			"ab, a",
			[]string{"[ ab]", "[ab ]", "[ ab ]", "[ a ]"}},
		{"emoji kept, spaces dropped",
			TextConfig{WordNGrams: [2]int{1, 1}},
			"  👍 ok\t\n",
			[]string{"👍", "ok"}},
		{"empty", TextConfig{WordNGrams: [2]int{1, 2}}, "", nil},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if err := tc.cfg.Validate(); err != nil {
				t.Fatal(err)
			}
			v := &TextVectorizer{cfg: tc.cfg}
			if got := v.Terms(tc.in); !reflect.DeepEqual(got, tc.want) {
				t.Errorf("Terms(%q) = %q, want %q", tc.in, got, tc.want)
			}
		})
	}
}

// TestTFIDFMatchesScikitLearnFormula checks the weights against the formula
// documented for scikit-learn's TfidfVectorizer (scikit-learn user guide,
// "Tf–idf term weighting", and the TfidfTransformer API page): with
// smooth_idf=True, idf(t) = ln((1+n)/(1+df(t))) + 1; with sublinear_tf=True,
// tf is replaced by 1 + ln(tf); with norm='l2', each row is divided by its
// Euclidean norm. Expected values are computed here by hand from that formula.
func TestTFIDFMatchesScikitLearnFormula(t *testing.T) {
	docs := []string{"the cat sat", "the cat the the dog", "dog"}
	v := fit(t, TextConfig{WordNGrams: [2]int{1, 1}, IDF: true, Sublinear: true, Norm: true}, docs)
	if want := []string{"cat", "dog", "sat", "the"}; !reflect.DeepEqual(v.Names(), want) {
		t.Fatalf("vocabulary %q, want %q", v.Names(), want)
	}
	n := 3.0
	idf := func(df float64) float64 { return math.Log((1+n)/(1+df)) + 1 }
	wantIDF := []float64{idf(2), idf(2), idf(1), idf(2)}
	for j, w := range wantIDF {
		if math.Abs(v.IDF()[j]-w) > 1e-15 {
			t.Errorf("idf[%s] = %v, want %v", v.Names()[j], v.IDF()[j], w)
		}
	}
	norm := func(m map[string]float64) map[string]float64 {
		var ss float64
		for _, x := range m {
			ss += x * x
		}
		for k := range m {
			m[k] /= math.Sqrt(ss)
		}
		return m
	}
	want := []map[string]float64{
		norm(map[string]float64{"the": idf(2), "cat": idf(2), "sat": idf(1)}),
		norm(map[string]float64{"the": (1 + math.Log(3)) * idf(2), "cat": idf(2), "dog": idf(2)}),
		norm(map[string]float64{"dog": idf(2)}),
	}
	// Worked numbers for row 1, so the test reads without a calculator:
	// idf(df=2) = ln(4/3)+1 = 1.287682, tf("the") = 1+ln 3 = 2.098612.
	if math.Abs(idf(2)-1.2876820724517808) > 1e-12 {
		t.Fatalf("idf(2) = %v", idf(2))
	}
	m := v.Transform(docs)
	for i := range docs {
		got := rowMap(v, m, i)
		if len(got) != len(want[i]) {
			t.Fatalf("row %d = %v, want %v", i, got, want[i])
		}
		for k, w := range want[i] {
			if math.Abs(got[k]-w) > 1e-12 {
				t.Errorf("row %d %q = %v, want %v", i, k, got[k], w)
			}
		}
	}
	// The same corpus through scikit-learn 1.2.1 (Debian 12), run once:
	// TfidfVectorizer(sublinear_tf=True, token_pattern=r"(?u)\b\w+\b")
	// .fit_transform(docs) gives row 0 = cat 0.51785612, sat 0.68091856,
	// the 0.51785612 and row 1 = cat 0.39515588, dog 0.39515588, the 0.829279.
	for _, c := range []struct {
		row  int
		term string
		want float64
	}{{0, "cat", 0.51785612}, {0, "sat", 0.68091856}, {0, "the", 0.51785612}, {1, "cat", 0.39515588}, {1, "dog", 0.39515588}, {1, "the", 0.829279}} {
		if got := rowMap(v, m, c.row)[c.term]; math.Abs(got-c.want) > 5e-8 {
			t.Errorf("row %d %q = %.8f, scikit-learn %.8f", c.row, c.term, got, c.want)
		}
	}
	// A text made only of unknown terms, or empty, gives an empty row
	// (documented: no entries; its norm stays 0).
	m = v.Transform([]string{"", "zebra!!", "   ", "cat"})
	for i := 0; i < 3; i++ {
		if idx, _ := m.Row(i); len(idx) != 0 {
			t.Errorf("row %d has %d entries, want none", i, len(idx))
		}
	}
	if idx, val := m.Row(3); len(idx) != 1 || val[0] != 1 {
		t.Errorf("single known term: %v %v, want one entry of 1", idx, val)
	}
}

func TestRawCountsAndMinDF(t *testing.T) {
	docs := []string{"a a b", "a c", "a b b b", "d"}
	cfg := TextConfig{WordNGrams: [2]int{1, 1}, MinDF: 2}
	v := fit(t, cfg, docs)
	if want := []string{"a", "b"}; !reflect.DeepEqual(v.Names(), want) {
		t.Fatalf("min_df 2 vocabulary %q, want %q", v.Names(), want)
	}
	m := v.Transform(docs)
	if got := rowMap(v, m, 2); got["a"] != 1 || got["b"] != 3 {
		t.Errorf("raw counts %v, want a:1 b:3", got)
	}
	cfg.MinDF = 0.5 // fraction: at least ceil(0.5*4) = 2 documents
	if v := fit(t, cfg, docs); len(v.Names()) != 2 {
		t.Errorf("min_df 0.5: %q", v.Names())
	}
	cfg.MinDF, cfg.MaxDF = 1, 0.5 // drop "a" (in 3 of 4)
	if v := fit(t, cfg, docs); !reflect.DeepEqual(v.Names(), []string{"b", "c", "d"}) {
		t.Errorf("max_df 0.5: %q", v.Names())
	}
	cfg.MaxDF, cfg.MaxFeatures = 0, 2 // top two by total count: a (4), b (4)
	if v := fit(t, cfg, docs); !reflect.DeepEqual(v.Names(), []string{"a", "b"}) {
		t.Errorf("max_features 2: %q", v.Names())
	}
	cfg.MaxFeatures, cfg.MinDF = 0, 5
	if _, err := cfg.Fit(docs); err == nil || !strings.Contains(err.Error(), "min_df") {
		t.Errorf("min_df above n: err = %v", err)
	}
}

// TestTermHashFNV1a checks the documented hash against the published FNV-1a
// 64-bit test vectors (Fowler/Noll/Vo, IETF draft-eastlake-fnv, test suite).
func TestTermHashFNV1a(t *testing.T) {
	for in, want := range map[string]uint64{
		"":       0xcbf29ce484222325,
		"a":      0xaf63dc4c8601ec8c,
		"foobar": 0x85944171f73967e8,
	} {
		if got := TermHash(in); got != want {
			t.Errorf("TermHash(%q) = %#x, want %#x", in, got, want)
		}
	}
}

func TestHashingBucketsAndSigns(t *testing.T) {
	cfg := TextConfig{WordNGrams: [2]int{1, 1}, HashBits: 2}
	v := fit(t, cfg, nil)
	if v.Cols() != 4 {
		t.Fatalf("cols %d", v.Cols())
	}
	doc := "alpha beta gamma delta alpha"
	want := make([]float64, 4)
	for w, c := range map[string]float64{"alpha": 2, "beta": 1, "gamma": 1, "delta": 1} {
		h := TermHash(w)
		s := 1.0
		if h>>63 == 1 {
			s = -1
		}
		want[h%4] += s * c
	}
	idx, val := v.Transform([]string{doc}).Row(0)
	got := make([]float64, 4)
	for k, j := range idx {
		got[j] = val[k]
		if val[k] == 0 {
			t.Errorf("stored zero at %d", j)
		}
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("buckets %v, want %v", got, want)
	}
	// idf per bucket, fitted on a sample, then L2 norm.
	cfg = TextConfig{WordNGrams: [2]int{1, 2}, HashBits: 18, IDF: true, Sublinear: true, Norm: true}
	v = fit(t, cfg, []string{"red fish", "blue fish", "one fish two fish"})
	m := v.Transform([]string{"red fish fish", ""})
	idx, val = m.Row(0)
	var ss float64
	for k := range idx {
		ss += val[k] * val[k]
	}
	if len(idx) != 4 || math.Abs(ss-1) > 1e-12 { // red, fish, "red fish", "fish fish"
		t.Errorf("hashed row %v %v: want 4 entries with unit norm", idx, val)
	}
	if idx, _ := m.Row(1); len(idx) != 0 {
		t.Errorf("empty text gave %d entries", len(idx))
	}
}

func randomTexts(rng *rand.Rand, n int) []string {
	words := strings.Fields("the a cat dog sat on mat Über naïve café running runs fast slow 42 3.14 email@example.org don't x-ray 👍 Ωmega")
	out := make([]string, n)
	for i := range out {
		k := rng.IntN(12)
		ws := make([]string, k)
		for j := range ws {
			ws[j] = words[rng.IntN(len(words))]
		}
		out[i] = strings.Join(ws, []string{" ", ", ", "; ", "  "}[rng.IntN(4)])
	}
	return out
}

func TestTransformParallelEqualsSerialAndRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	texts := randomTexts(rng, 5000)
	for _, cfg := range []TextConfig{
		DefaultTextConfig(),
		{WordNGrams: [2]int{1, 2}, CharNGrams: [2]int{3, 5}, Language: "english", StopWords: true, Stem: true, MinDF: 2, IDF: true, Sublinear: true, Norm: true},
		{WordNGrams: [2]int{1, 2}, HashBits: 12, IDF: true, Norm: true},
	} {
		t.Run(fmt.Sprintf("%+v", cfg), func(t *testing.T) {
			v := fit(t, cfg, texts)
			all := v.Transform(texts)
			if all.Rows() != len(texts) || all.Indptr[len(texts)] != len(all.Data) {
				t.Fatalf("shape %d rows, nnz %d/%d", all.Rows(), all.Indptr[len(texts)], len(all.Data))
			}
			b, err := json.Marshal(v)
			if err != nil {
				t.Fatal(err)
			}
			var w TextVectorizer
			if err := json.Unmarshal(b, &w); err != nil {
				t.Fatal(err)
			}
			for i := 0; i < len(texts); i += 97 {
				one := w.Transform(texts[i : i+1])
				ai, av := all.Row(i)
				bi, bv := one.Row(0)
				if !reflect.DeepEqual(ai, bi) || !reflect.DeepEqual(av, bv) {
					t.Fatalf("row %d (%q): parallel %v %v, single after reload %v %v", i, texts[i], ai, av, bi, bv)
				}
				for k := 1; k < len(ai); k++ {
					if ai[k] <= ai[k-1] {
						t.Fatalf("row %d columns not increasing: %v", i, ai)
					}
				}
			}
		})
	}
}

func TestTextConfigErrors(t *testing.T) {
	for _, c := range []TextConfig{
		{},
		{WordNGrams: [2]int{2, 1}},
		{WordNGrams: [2]int{1, 1}, Stem: true, Language: "klingon"},
		{WordNGrams: [2]int{1, 1}, MinDF: -1},
		{WordNGrams: [2]int{1, 1}, MinDF: 2.5},
		{WordNGrams: [2]int{1, 1}, HashBits: 40},
	} {
		if _, err := c.Fit([]string{"a"}); err == nil {
			t.Errorf("%+v: want an error", c)
		}
	}
	if _, err := DefaultTextConfig().Fit(nil); err == nil {
		t.Error("fit on no texts: want an error")
	}
	var v TextVectorizer
	for _, bad := range []string{
		`{"config":{"word_ngrams":[1,1],"idf":true},"vocabulary":["a","b"],"idf":[1]}`,
		`{"config":{"word_ngrams":[1,1]},"vocabulary":["b","a"]}`,
		`{"config":{"word_ngrams":[1,1]},"vocabulary":[]}`,
		`{"config":{"word_ngrams":[1,1],"idf":true},"vocabulary":["a"],"idf":[-1]}`,
	} {
		if err := json.Unmarshal([]byte(bad), &v); err == nil {
			t.Errorf("%s: want an error", bad)
		}
	}
}

// FuzzTextTransform checks that any input, including invalid UTF-8, gives a
// well-formed row: increasing columns in range, finite values, unit norm or
// empty.
func FuzzTextTransform(f *testing.F) {
	for _, s := range []string{"", "Hello, World!", "\xff\xfe bad utf8 \xc3", "ΣΊΣΥΦΟΣ straße 👍🏽 x-ray", "a\u0301\u200d b"} {
		f.Add(s)
	}
	cfg := TextConfig{WordNGrams: [2]int{1, 2}, CharNGrams: [2]int{2, 4}, Language: "english", StopWords: true, Stem: true, HashBits: 10, Sublinear: true, Norm: true}
	v, err := cfg.Fit(nil)
	if err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, s string) {
		m := v.Transform([]string{s, s})
		idx, val := m.Row(1)
		var ss float64
		for k, j := range idx {
			if j < 0 || int(j) >= m.Cols() || (k > 0 && j <= idx[k-1]) {
				t.Fatalf("bad columns %v", idx)
			}
			if math.IsNaN(val[k]) || math.IsInf(val[k], 0) {
				t.Fatalf("value %v", val[k])
			}
			ss += val[k] * val[k]
		}
		if len(idx) > 0 && math.Abs(ss-1) > 1e-9 {
			t.Fatalf("norm² %v", ss)
		}
	})
}

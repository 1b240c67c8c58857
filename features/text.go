package features

import (
	"bytes"
	"encoding/gob"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"strings"
	"sync"
	"unicode"
	"unicode/utf8"

	"github.com/clipperhouse/uax29/v2/words"
	"github.com/kljensen/snowball/english"
	"github.com/kljensen/snowball/french"
	"github.com/kljensen/snowball/hungarian"
	"github.com/kljensen/snowball/norwegian"
	"github.com/kljensen/snowball/russian"
	"github.com/kljensen/snowball/spanish"
	"github.com/kljensen/snowball/swedish"
	"golang.org/x/text/cases"
)

// TextConfig says how texts become sparse rows. It serialises to JSON so a
// model file can carry it; DefaultTextConfig gives the usual settings.
//
// Pipeline, per text:
//  1. split at Unicode word boundaries (UAX #29);
//  2. drop tokens with no letter, number or other symbol (spaces and pure
//     punctuation);
//  3. fold case (Unicode full case folding, golang.org/x/text/cases.Fold);
//  4. if StopWords, drop the Snowball stop words of Language; if Stem, replace
//     each token by its Snowball stem in Language;
//  5. form word n-grams of WordNGrams[0]..WordNGrams[1] tokens, joined by one
//     space, and, if CharNGrams[1] > 0, character n-grams of
//     CharNGrams[0]..CharNGrams[1] runes within each token padded by one space
//     on both sides (a token shorter than n yields its padded self once). A
//     character n-gram g is named "[g]" so it never meets a word n-gram.
//
// Weights: a term's raw count tf becomes 1+ln(tf) if Sublinear, is
// multiplied by idf = ln((1+n)/(1+df))+1 if IDF (n documents in the fitting
// set, df of them holding the term: scikit-learn's smooth_idf), and the row is
// divided by its Euclidean norm if Norm. An empty text (or one with no kept
// token) gives a row with no entries.
type TextConfig struct {
	// Language names the Snowball language for StopWords and Stem: english,
	// french, hungarian, norwegian, russian, spanish or swedish.
	Language  string `json:"language,omitempty"`
	StopWords bool   `json:"stop_words,omitempty"`
	Stem      bool   `json:"stem,omitempty"`
	// WordNGrams is {min, max} tokens per word n-gram; {0, 0} means none.
	WordNGrams [2]int `json:"word_ngrams"`
	// CharNGrams is {min, max} runes per character n-gram; {0, 0} means none.
	CharNGrams [2]int `json:"char_ngrams"`
	// MinDF keeps terms found in at least MinDF documents when MinDF >= 1,
	// or in at least a fraction MinDF of the documents when 0 < MinDF < 1
	// (rounded up). 0 means 1. Ignored when hashing.
	MinDF float64 `json:"min_df,omitempty"`
	// MaxDF drops terms found in more than a fraction MaxDF of the
	// documents; 0 means no limit. Ignored when hashing.
	MaxDF float64 `json:"max_df,omitempty"`
	// MaxFeatures keeps only the MaxFeatures terms with the highest total
	// count (ties by name); 0 means no limit. Ignored when hashing.
	MaxFeatures int `json:"max_features,omitempty"`
	// HashBits, when > 0, replaces the vocabulary by 2^HashBits signed
	// buckets: a term whose FNV-1a 64-bit hash of its name is h goes to
	// column h mod 2^HashBits with sign + if bit 63 of h is 0, else −.
	// Signed weights of terms sharing a bucket add up. 1..24 (2^24 buckets
	// already need 128 MB of idf weights).
	HashBits int `json:"hash_bits,omitempty"`
	// IDF multiplies by the smoothed inverse document frequency (per bucket
	// when hashing: df counts documents with any term in the bucket).
	IDF bool `json:"idf"`
	// Sublinear replaces tf by 1+ln(tf).
	Sublinear bool `json:"sublinear"`
	// Norm scales each row to unit Euclidean (L2) norm.
	Norm bool `json:"norm"`
}

// DefaultTextConfig returns word 1–2-grams, case folding, no stop words or
// stemming, min_df 1, smoothed IDF, sublinear tf and L2 norm.
func DefaultTextConfig() TextConfig {
	return TextConfig{WordNGrams: [2]int{1, 2}, IDF: true, Sublinear: true, Norm: true}
}

type langFuncs struct {
	stop func(string) bool
	stem func(string, bool) string
}

var languages = map[string]langFuncs{
	"english":   {english.IsStopWord, english.Stem},
	"french":    {french.IsStopWord, french.Stem},
	"hungarian": {hungarian.IsStopWord, hungarian.Stem},
	"norwegian": {norwegian.IsStopWord, norwegian.Stem},
	"russian":   {russian.IsStopWord, russian.Stem},
	"spanish":   {spanish.IsStopWord, spanish.Stem},
	"swedish":   {swedish.IsStopWord, swedish.Stem},
}

// Validate reports the first setting that cannot work.
func (c TextConfig) Validate() error {
	if c.StopWords || c.Stem {
		if _, ok := languages[c.Language]; !ok {
			return fmt.Errorf("features: language %q has no stop words or stemmer (want one of english, french, hungarian, norwegian, russian, spanish, swedish)", c.Language)
		}
	}
	w, ch := c.WordNGrams, c.CharNGrams
	if w != [2]int{} && (w[0] < 1 || w[1] < w[0] || w[1] > 8) {
		return fmt.Errorf("features: word n-grams %v: want 1 <= min <= max <= 8, or {0,0} for none", w)
	}
	if ch != [2]int{} && (ch[0] < 1 || ch[1] < ch[0] || ch[1] > 16) {
		return fmt.Errorf("features: character n-grams %v: want 1 <= min <= max <= 16, or {0,0} for none", ch)
	}
	if w == [2]int{} && ch == [2]int{} {
		return errors.New("features: neither word nor character n-grams are configured")
	}
	if c.MinDF < 0 || math.IsNaN(c.MinDF) || (c.MinDF > 1 && c.MinDF != math.Trunc(c.MinDF)) {
		return fmt.Errorf("features: min_df %v: want a count >= 1 or a fraction in (0,1)", c.MinDF)
	}
	if c.MaxDF < 0 || c.MaxDF > 1 || math.IsNaN(c.MaxDF) {
		return fmt.Errorf("features: max_df %v: want a fraction in (0,1], or 0 for none", c.MaxDF)
	}
	if c.MaxFeatures < 0 {
		return fmt.Errorf("features: max_features %d is negative", c.MaxFeatures)
	}
	if c.HashBits < 0 || c.HashBits > 24 {
		return fmt.Errorf("features: hash_bits %d: want 1..24, or 0 for a vocabulary", c.HashBits)
	}
	return nil
}

// TextVectorizer is a fitted TextConfig: the vocabulary (or the hashing
// buckets) and the idf weights. It is safe for concurrent use and
// serialises to JSON (MarshalJSON / UnmarshalJSON).
type TextVectorizer struct {
	cfg   TextConfig
	vocab []string         // column names, sorted (vocabulary mode)
	idf   []float64        // per column; nil when !cfg.IDF
	index map[uint64]int32 // FNV-1a hash of a term's name → column
	nDocs int              // documents seen by Fit
	cache sync.Pool        // *tokenizer
}

// FNV-1a, 64 bit (Fowler, Noll, Vo; IETF draft-eastlake-fnv).
const (
	fnvOffset = 14695981039346656037
	fnvPrime  = 1099511628211
)

func fnvString(h uint64, s string) uint64 {
	for i := 0; i < len(s); i++ {
		h ^= uint64(s[i])
		h *= fnvPrime
	}
	return h
}

func fnvBytes(h uint64, s []byte) uint64 {
	for _, b := range s {
		h ^= uint64(b)
		h *= fnvPrime
	}
	return h
}

// TermHash returns the FNV-1a 64-bit hash of a term name: the key of the
// vocabulary and, when hashing, the source of the bucket and the sign.
func TermHash(name string) uint64 { return fnvString(fnvOffset, name) }

// tokenizer holds one goroutine's scratch space; nothing is allocated per
// token once it has warmed up (stems are cached per tokenizer).
type tokenizer struct {
	cfg    *TextConfig
	lang   langFuncs
	it     *words.Iterator[string]
	caser  cases.Caser
	buf    []byte  // kept tokens of the current text, separated by one space
	starts []int32 // token i is buf[starts[i]:ends[i]]
	ends   []int32
	pad    []byte  // padded token for character n-grams
	runeAt []int32 // rune offsets in pad
	fold   []byte  // case-folding scratch
	cache  map[string]string
	hashes []uint64
	pairs  []entry
	// when fitting: called with each term's hash and the bytes of its name
	// (a character n-gram's name is "[" + gram + "]")
	record func(h uint64, gram []byte, char bool)
}

type entry struct {
	col int32
	v   float64
}

const stemCacheMax = 1 << 20

func newTokenizer(cfg *TextConfig) *tokenizer {
	t := &tokenizer{cfg: cfg, it: words.FromString(""), caser: cases.Fold()}
	if cfg.StopWords || cfg.Stem {
		t.lang = languages[cfg.Language]
		t.cache = make(map[string]string)
	}
	return t
}

// keep reports whether a token has a letter, a number or an other-symbol
// (emoji and the like); spaces and pure punctuation are dropped.
func keep(tok string) bool {
	for i := 0; i < len(tok); {
		b := tok[i]
		if b < utf8.RuneSelf {
			if ('a' <= b && b <= 'z') || ('A' <= b && b <= 'Z') || ('0' <= b && b <= '9') {
				return true
			}
			i++
			continue
		}
		r, n := utf8.DecodeRuneInString(tok[i:])
		if unicode.IsLetter(r) || unicode.IsNumber(r) || unicode.Is(unicode.So, r) {
			return true
		}
		i += n
	}
	return false
}

// appendFold appends the case-folded token to t.buf.
func (t *tokenizer) appendFold(tok string) {
	ascii := true
	for i := 0; i < len(tok); i++ {
		if tok[i] >= utf8.RuneSelf {
			ascii = false
			break
		}
	}
	if ascii {
		for i := 0; i < len(tok); i++ {
			b := tok[i]
			if 'A' <= b && b <= 'Z' {
				b += 'a' - 'A'
			}
			t.buf = append(t.buf, b)
		}
		return
	}
	if cap(t.fold) < 4*len(tok)+16 {
		t.fold = make([]byte, 4*len(tok)+16)
	}
	t.caser.Reset()
	nDst, _, err := t.caser.Transform(t.fold[:cap(t.fold)], []byte(tok), true)
	if err != nil { // cannot happen with the size above; fall back safely
		t.buf = append(t.buf, cases.Fold().String(tok)...)
		return
	}
	t.buf = append(t.buf, t.fold[:nDst]...)
}

// tokens fills buf/starts/ends with the kept, folded (stopped, stemmed)
// tokens of s.
func (t *tokenizer) tokens(s string) {
	t.buf, t.starts, t.ends = t.buf[:0], t.starts[:0], t.ends[:0]
	t.it.SetText(s)
	for t.it.Next() {
		tok := t.it.Value()
		if !keep(tok) {
			continue
		}
		start := len(t.buf)
		if start > 0 {
			t.buf = append(t.buf, ' ')
			start++
		}
		t.appendFold(tok)
		if t.cache != nil {
			term, ok := t.cache[string(t.buf[start:])]
			if !ok {
				w := string(t.buf[start:])
				term = w
				if t.cfg.StopWords && t.lang.stop(w) {
					term = ""
				} else if t.cfg.Stem {
					term = t.lang.stem(w, true)
				}
				if len(t.cache) >= stemCacheMax {
					clear(t.cache)
				}
				t.cache[w] = term
			}
			if term == "" {
				if start > 0 {
					start--
				}
				t.buf = t.buf[:start]
				continue
			}
			t.buf = append(t.buf[:start], term...)
		}
		t.starts = append(t.starts, int32(start))
		t.ends = append(t.ends, int32(len(t.buf)))
	}
}

// terms appends the hashes of all n-grams of s to t.hashes (reset first).
func (t *tokenizer) terms(s string) {
	t.tokens(s)
	t.hashes = t.hashes[:0]
	nt := len(t.starts)
	if w := t.cfg.WordNGrams; w[1] > 0 {
		for i := 0; i < nt; i++ {
			h := uint64(fnvOffset)
			for n := 1; n <= w[1] && i+n <= nt; n++ {
				j := i + n - 1
				if n > 1 {
					h = fnvBytes(h, t.buf[t.ends[j-1]:t.ends[j]]) // " " + token j
				} else {
					h = fnvBytes(h, t.buf[t.starts[j]:t.ends[j]])
				}
				if n >= w[0] {
					t.hashes = append(t.hashes, h)
					if t.record != nil {
						t.record(h, t.buf[t.starts[i]:t.ends[j]], false)
					}
				}
			}
		}
	}
	if c := t.cfg.CharNGrams; c[1] > 0 {
		for i := 0; i < nt; i++ {
			t.pad = append(append(append(t.pad[:0], ' '), t.buf[t.starts[i]:t.ends[i]]...), ' ')
			t.runeAt = t.runeAt[:0]
			for k := 0; k < len(t.pad); {
				t.runeAt = append(t.runeAt, int32(k))
				_, sz := utf8.DecodeRune(t.pad[k:])
				k += sz
			}
			nr := len(t.runeAt)
			t.runeAt = append(t.runeAt, int32(len(t.pad)))
			for n := c[0]; n <= c[1]; n++ {
				last := nr - n
				if last < 0 {
					last = 0
				}
				for off := 0; off <= last; off++ {
					end := off + n
					if end > nr {
						end = nr
					}
					g := t.pad[t.runeAt[off]:t.runeAt[end]]
					h := fnvBytes(fnvString(fnvOffset, "["), g)
					h = fnvString(h, "]")
					t.hashes = append(t.hashes, h)
					if t.record != nil {
						t.record(h, g, true)
					}
				}
				if nr <= n { // a token no longer than n counts once
					break
				}
			}
		}
	}
}

// row computes the weighted, sorted entries of one text into t.pairs.
func (v *TextVectorizer) row(t *tokenizer, s string) {
	t.terms(s)
	t.pairs = t.pairs[:0]
	hs := t.hashes
	if len(hs) == 0 {
		return
	}
	slices.Sort(hs)
	cfg := &v.cfg
	mask := uint64(1)<<uint(cfg.HashBits) - 1
	for i := 0; i < len(hs); {
		j := i + 1
		for j < len(hs) && hs[j] == hs[i] {
			j++
		}
		h := hs[i]
		tf := float64(j - i)
		i = j
		if cfg.Sublinear && tf > 1 {
			tf = 1 + math.Log(tf)
		}
		if cfg.HashBits > 0 {
			col := int32(h & mask)
			if h>>63 != 0 {
				tf = -tf
			}
			t.pairs = append(t.pairs, entry{col, tf})
		} else if col, ok := v.index[h]; ok {
			t.pairs = append(t.pairs, entry{col, tf})
		}
	}
	if len(t.pairs) > 1 {
		slices.SortFunc(t.pairs, func(a, b entry) int { return int(a.col - b.col) })
	}
	if cfg.HashBits > 0 { // merge signed weights sharing a bucket
		out := t.pairs[:0]
		for _, e := range t.pairs {
			if n := len(out); n > 0 && out[n-1].col == e.col {
				out[n-1].v += e.v
				continue
			}
			out = append(out, e)
		}
		t.pairs = out[:0]
		for _, e := range out {
			if e.v != 0 {
				t.pairs = append(t.pairs, e)
			}
		}
	}
	if v.idf != nil {
		for k := range t.pairs {
			t.pairs[k].v *= v.idf[t.pairs[k].col]
		}
	}
	if cfg.Norm {
		var ss float64
		for _, e := range t.pairs {
			ss += e.v * e.v
		}
		if ss > 0 {
			inv := 1 / math.Sqrt(ss)
			for k := range t.pairs {
				t.pairs[k].v *= inv
			}
		}
	}
}

// Fit learns the vocabulary (terms passing MinDF, MaxDF and MaxFeatures,
// sorted by name, so column order is deterministic) and the idf weights from
// texts. When hashing, only the idf weights are learnt (texts may be a sample
// of the archive) and texts may be empty if IDF is off. Fit uses all
// GOMAXPROCS cores.
func (c TextConfig) Fit(texts []string) (*TextVectorizer, error) {
	if err := c.Validate(); err != nil {
		return nil, err
	}
	v := &TextVectorizer{cfg: c, nDocs: len(texts)}
	if c.HashBits > 0 {
		if c.IDF {
			if len(texts) == 0 {
				return nil, errors.New("features: fitting idf weights needs at least one text")
			}
			v.idf = v.fitHashIDF(texts)
		}
		return v, nil
	}
	if len(texts) == 0 {
		return nil, errors.New("features: fitting a vocabulary needs at least one text")
	}
	type stat struct {
		df, last int32
		count    int64
		name     string
	}
	workers := workerCount(len(texts))
	type fitState struct {
		m   map[uint64]*stat
		t   *tokenizer
		doc int32
		err error
	}
	states := make([]*fitState, workers)
	parallel(len(texts), workers, func(w, lo, hi int) {
		st := states[w]
		if st == nil {
			st = &fitState{m: make(map[uint64]*stat), t: newTokenizer(&v.cfg)}
			st.t.record = func(h uint64, g []byte, char bool) {
				s := st.m[h]
				if s == nil {
					s = &stat{last: -1, name: gramName(g, char)}
					st.m[h] = s
				} else if !sameName(s.name, g, char) && st.err == nil {
					st.err = fmt.Errorf("features: terms %q and %q share the 64-bit hash %#x; use hashing", s.name, gramName(g, char), h)
				}
				if s.last != st.doc {
					s.df++
					s.last = st.doc
				}
				s.count++
			}
			states[w] = st
		}
		for i := lo; i < hi; i++ {
			st.doc = int32(i)
			st.t.terms(texts[i])
		}
	})
	locals := make([]map[uint64]*stat, 0, workers)
	for _, st := range states {
		if st != nil {
			if st.err != nil {
				return nil, st.err
			}
			locals = append(locals, st.m)
		}
	}
	all := locals[0]
	for _, m := range locals[1:] {
		for h, s := range m {
			g := all[h]
			if g == nil {
				all[h] = s
				continue
			}
			if g.name != s.name {
				return nil, fmt.Errorf("features: terms %q and %q share the 64-bit hash %#x; use hashing", g.name, s.name, h)
			}
			g.df += s.df
			g.count += s.count
		}
	}
	n := len(texts)
	minDF := 1
	switch {
	case c.MinDF >= 1:
		minDF = int(c.MinDF)
	case c.MinDF > 0:
		minDF = int(math.Ceil(c.MinDF * float64(n)))
	}
	maxDF := n
	if c.MaxDF > 0 {
		maxDF = int(math.Floor(c.MaxDF * float64(n)))
	}
	kept := make([]*stat, 0, len(all))
	for _, s := range all {
		if int(s.df) >= minDF && int(s.df) <= maxDF {
			kept = append(kept, s)
		}
	}
	if len(kept) == 0 {
		return nil, fmt.Errorf("features: no term is found in at least %d and at most %d of the %d texts; lower min_df or raise max_df", minDF, maxDF, n)
	}
	if c.MaxFeatures > 0 && len(kept) > c.MaxFeatures {
		slices.SortFunc(kept, func(a, b *stat) int {
			if a.count != b.count {
				if a.count > b.count {
					return -1
				}
				return 1
			}
			return strings.Compare(a.name, b.name)
		})
		kept = kept[:c.MaxFeatures]
	}
	slices.SortFunc(kept, func(a, b *stat) int { return strings.Compare(a.name, b.name) })
	v.vocab = make([]string, len(kept))
	v.index = make(map[uint64]int32, len(kept))
	if c.IDF {
		v.idf = make([]float64, len(kept))
	}
	for j, s := range kept {
		v.vocab[j] = s.name
		v.index[TermHash(s.name)] = int32(j)
		if c.IDF {
			v.idf[j] = smoothIDF(n, int(s.df))
		}
	}
	return v, nil
}

// gramName returns the name of a word n-gram (its bytes) or of a character
// n-gram ("[" + gram + "]").
func gramName(g []byte, char bool) string {
	if char {
		return "[" + string(g) + "]"
	}
	return string(g)
}

// sameName reports whether name is the name of gram g.
func sameName(name string, g []byte, char bool) bool {
	if char {
		return len(name) == len(g)+2 && name[1:len(name)-1] == string(g)
	}
	return name == string(g)
}

// smoothIDF returns ln((1+n)/(1+df)) + 1.
func smoothIDF(n, df int) float64 {
	return math.Log(float64(1+n)/float64(1+df)) + 1
}

func (v *TextVectorizer) fitHashIDF(texts []string) []float64 {
	nb := 1 << uint(v.cfg.HashBits)
	mask := uint64(nb - 1)
	workers := workerCount(len(texts))
	dfs := make([][]int32, workers)
	parallel(len(texts), workers, func(w, lo, hi int) {
		if dfs[w] == nil {
			dfs[w] = make([]int32, nb)
		}
		df := dfs[w]
		t := newTokenizer(&v.cfg)
		var bs []uint64
		for i := lo; i < hi; i++ {
			t.terms(texts[i])
			bs = bs[:0]
			for _, h := range t.hashes {
				bs = append(bs, h&mask)
			}
			slices.Sort(bs)
			bs = slices.Compact(bs)
			for _, b := range bs {
				df[b]++
			}
		}
	})
	idf := make([]float64, nb)
	for b := range idf {
		d := 0
		for _, df := range dfs {
			if df != nil {
				d += int(df[b])
			}
		}
		idf[b] = smoothIDF(len(texts), d)
	}
	return idf
}

// Transform returns one row per text (CSR, columns increasing). Unknown
// terms are ignored; a text with no known term gives an empty row. It uses
// all GOMAXPROCS cores and is safe for concurrent use.
func (v *TextVectorizer) Transform(texts []string) *CSR {
	n := len(texts)
	m := &CSR{NRows: n, NCols: v.Cols(), Indptr: make([]int, n+1)}
	if n == 0 {
		return m
	}
	workers := workerCount(n)
	// Chunks are small enough to balance, large enough to amortise.
	chunk := max(64, n/(workers*8))
	nChunks := (n + chunk - 1) / chunk
	idx := make([][]int32, nChunks)
	val := make([][]float64, nChunks)
	parallel(nChunks, workers, func(_, lo, hi int) {
		t := v.getTokenizer()
		defer v.cache.Put(t)
		for c := lo; c < hi; c++ {
			a, b := c*chunk, min((c+1)*chunk, n)
			var ci []int32
			var cv []float64
			for i := a; i < b; i++ {
				v.row(t, texts[i])
				for _, e := range t.pairs {
					ci = append(ci, e.col)
					cv = append(cv, e.v)
				}
				m.Indptr[i+1] = len(t.pairs)
			}
			idx[c], val[c] = ci, cv
		}
	})
	for i := 0; i < n; i++ {
		m.Indptr[i+1] += m.Indptr[i]
	}
	nnz := m.Indptr[n]
	m.Indices = make([]int32, 0, nnz)
	m.Data = make([]float64, 0, nnz)
	for c := range idx {
		m.Indices = append(m.Indices, idx[c]...)
		m.Data = append(m.Data, val[c]...)
	}
	return m
}

func (v *TextVectorizer) getTokenizer() *tokenizer {
	if t, ok := v.cache.Get().(*tokenizer); ok {
		return t
	}
	return newTokenizer(&v.cfg)
}

// Terms returns the terms (word and character n-grams, by name, in order of
// appearance, repeats kept) that the vectoriser would count in s, before the
// vocabulary is applied. It is meant for inspection and tests.
func (v *TextVectorizer) Terms(s string) []string {
	t := newTokenizer(&v.cfg)
	var out []string
	t.record = func(_ uint64, g []byte, char bool) { out = append(out, gramName(g, char)) }
	t.terms(s)
	return out
}

// Config returns the configuration the vectoriser was fitted with.
func (v *TextVectorizer) Config() TextConfig { return v.cfg }

// Cols returns the number of columns: the vocabulary size, or 2^HashBits.
func (v *TextVectorizer) Cols() int {
	if v.cfg.HashBits > 0 {
		return 1 << uint(v.cfg.HashBits)
	}
	return len(v.vocab)
}

// Names returns the column names: the vocabulary (sorted), or nil when
// hashing. Callers must not modify it.
func (v *TextVectorizer) Names() []string { return v.vocab }

// IDF returns the idf weight of each column, or nil if IDF is off. Callers
// must not modify it.
func (v *TextVectorizer) IDF() []float64 { return v.idf }

// textFile is the JSON form of a TextVectorizer.
type textFile struct {
	Config     TextConfig `json:"config"`
	Docs       int        `json:"docs"`
	Vocabulary []string   `json:"vocabulary,omitempty"`
	IDF        []float64  `json:"idf,omitempty"`
}

// MarshalJSON writes the configuration, the number of fitting documents, the
// vocabulary and the idf weights.
func (v *TextVectorizer) MarshalJSON() ([]byte, error) {
	return json.Marshal(textFile{v.cfg, v.nDocs, v.vocab, v.idf})
}

// UnmarshalJSON reads what MarshalJSON wrote and checks it.
func (v *TextVectorizer) UnmarshalJSON(b []byte) error {
	var f textFile
	if err := json.Unmarshal(b, &f); err != nil {
		return fmt.Errorf("features: reading text vectoriser: %w", err)
	}
	return v.load(f)
}

// GobEncode writes what MarshalJSON writes, as gob (model files).
func (v *TextVectorizer) GobEncode() ([]byte, error) {
	var b bytes.Buffer
	err := gob.NewEncoder(&b).Encode(textFile{v.cfg, v.nDocs, v.vocab, v.idf})
	return b.Bytes(), err
}

// GobDecode reads what GobEncode wrote and checks it as UnmarshalJSON does.
func (v *TextVectorizer) GobDecode(b []byte) error {
	var f textFile
	if err := gob.NewDecoder(bytes.NewReader(b)).Decode(&f); err != nil {
		return fmt.Errorf("features: reading text vectoriser: %w", err)
	}
	return v.load(f)
}

// load checks the stored form of a vectoriser and rebuilds it.
func (v *TextVectorizer) load(f textFile) error {
	if err := f.Config.Validate(); err != nil {
		return err
	}
	cols := len(f.Vocabulary)
	if f.Config.HashBits > 0 {
		if len(f.Vocabulary) != 0 {
			return errors.New("features: hashing vectoriser carries a vocabulary")
		}
		cols = 1 << uint(f.Config.HashBits)
	} else if cols == 0 {
		return errors.New("features: text vectoriser has an empty vocabulary")
	}
	if f.Config.IDF != (f.IDF != nil) || (f.IDF != nil && len(f.IDF) != cols) {
		return fmt.Errorf("features: text vectoriser has %d idf weights for %d columns (idf %v)", len(f.IDF), cols, f.Config.IDF)
	}
	for j, w := range f.IDF {
		if !(w > 0) || math.IsInf(w, 0) {
			return fmt.Errorf("features: idf weight %d is %v, want a positive finite number", j, w)
		}
	}
	*v = TextVectorizer{cfg: f.Config, nDocs: f.Docs, vocab: f.Vocabulary, idf: f.IDF}
	if f.Config.HashBits == 0 {
		v.index = make(map[uint64]int32, cols)
		for j, s := range f.Vocabulary {
			if j > 0 && f.Vocabulary[j-1] >= s {
				return fmt.Errorf("features: vocabulary is not sorted and unique at %d (%q)", j, s)
			}
			v.index[TermHash(s)] = int32(j)
		}
	}
	return nil
}

// workerCount returns how many goroutines to use for n jobs.
func workerCount(n int) int {
	return max(1, min(runtime.GOMAXPROCS(0), n))
}

// parallel splits [0,n) into contiguous ranges handed to at most workers
// goroutines; f gets the worker number and a range. Ranges are handed out in
// small pieces so that uneven work balances.
func parallel(n, workers int, f func(w, lo, hi int)) {
	if n == 0 {
		return
	}
	if workers <= 1 {
		f(0, 0, n)
		return
	}
	piece := max(1, n/(workers*16))
	var mu sync.Mutex
	next := 0
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			for {
				mu.Lock()
				lo := next
				next += piece
				mu.Unlock()
				if lo >= n {
					return
				}
				f(w, lo, min(lo+piece, n))
			}
		}(w)
	}
	wg.Wait()
}

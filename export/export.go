// Package export writes what a project has decided, item by item, and rolls
// it up to the documents items came from: Rows gives one row per item with
// its final class and provenance (gold, crowd consensus or machine label),
// Write writes rows as CSV, JSON lines or Parquet, Rollup gives per-parent
// class shares with exact intervals. It reads the store and never changes
// it; the round (package round) decides, export only reports.
package export

import (
	"bufio"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"regexp"
	"slices"
	"sort"
	"strconv"
	"strings"

	"github.com/parquet-go/parquet-go"

	"handoff"
	"handoff/round"
	"handoff/store"
)

// Row is one item of an export: its final class and where it came from.
//
// Rules: Source is gold (an expert answer), crowd (the consensus of at least
// one label), machine (an autolabel at or above the threshold) or "" (no
// answer yet: the item waits for people). Confidence is the gold answer's 1,
// the consensus posterior of Class, or the machine's calibrated probability.
// Posterior is the consensus posterior (nil without labels). Model and Round
// are set for machine labels.
type Row struct {
	Item       string            `json:"item" parquet:"item"`
	Kind       string            `json:"kind" parquet:"kind"`
	Class      string            `json:"class" parquet:"class"`
	Source     string            `json:"source" parquet:"source"`
	Confidence float64           `json:"confidence" parquet:"confidence"`
	Posterior  []float64         `json:"posterior,omitempty" parquet:"posterior,list"`
	Labels     int               `json:"labels" parquet:"labels"`
	Model      string            `json:"model,omitempty" parquet:"model"`
	Round      int               `json:"round,omitempty" parquet:"round"`
	Parent     string            `json:"parent,omitempty" parquet:"parent"`
	Position   int               `json:"position" parquet:"position"`
	Covariates map[string]string `json:"covariates,omitempty" parquet:"covariates"`
	// Answers holds, in a question tree, one answer per follow-up question
	// (in codebook order), empty where the question is not asked of the
	// item or has no consensus yet.
	Answers []Answer `json:"answers,omitempty" parquet:"answers,list"`
}

// Answer is an item's answer to a follow-up question: its crowd consensus
// (Source crowd; follow-ups have no gold or machine labels yet), the
// posterior of Class as Confidence and the number of labels combined. An
// empty Class and Source mean not asked (the item's answer to the parent
// question is outside the follow-up's condition) or not answered yet.
type Answer struct {
	Question   string  `json:"question" parquet:"question"`
	Class      string  `json:"class" parquet:"class"`
	Source     string  `json:"source" parquet:"source"`
	Confidence float64 `json:"confidence" parquet:"confidence"`
	Labels     int     `json:"labels" parquet:"labels"`
}

// Rows returns one export row per item, in store order: gold first, then
// the crowd's consensus, then machine labels.
func Rows(st *store.Store) ([]Row, error) {
	cb := st.Codebook()
	cons := map[string]handoff.Consensus{}
	cs, _, err := st.Consensus()
	if err != nil {
		return nil, err
	}
	for _, c := range cs {
		cons[c.Item] = c
	}
	gold := map[string]string{}
	gs, err := st.Gold()
	if err != nil {
		return nil, err
	}
	for _, g := range gs {
		gold[g.Item] = g.Class
	}
	machine := map[string]handoff.MachineLabel{} // the first question's
	follow := map[string]map[string]handoff.MachineLabel{}
	if err := st.MachineLabels(func(m handoff.MachineLabel) error {
		if m.Question == "" {
			machine[m.Item] = m
		} else {
			if follow[m.Question] == nil {
				follow[m.Question] = map[string]handoff.MachineLabel{}
			}
			follow[m.Question][m.Item] = m
		}
		return nil
	}); err != nil {
		return nil, err
	}
	var rows []Row
	err = st.EachItem(func(_ int, it handoff.Item) error {
		r := Row{Item: it.ID, Kind: string(it.Kind), Parent: it.Parent, Position: it.Position, Covariates: it.Covariates}
		c, hasC := cons[it.ID]
		if hasC && c.Labels > 0 {
			r.Posterior = c.Posterior
			r.Labels = c.Labels
		}
		switch g, ok := gold[it.ID]; {
		case ok:
			r.Class, r.Source, r.Confidence = g, string(handoff.SourceGold), 1
		case hasC && c.Labels > 0:
			r.Class, r.Source = c.Class, string(handoff.SourceCrowd)
			if k, ok := cb.Index(c.Class); ok && k < len(c.Posterior) {
				r.Confidence = c.Posterior[k]
			}
		default:
			if m, ok := machine[it.ID]; ok {
				r.Class, r.Source, r.Confidence, r.Model, r.Round = m.Class, string(handoff.SourceMachine), m.Confidence, m.Model, m.Round
			}
		}
		rows = append(rows, r)
		return nil
	})
	if err != nil || !cb.Tree() {
		return rows, err
	}
	return rows, addAnswers(st, cb, rows, follow)
}

// addAnswers fills each row's Answers with the stored consensus of every
// follow-up question, or else its machine label (machine, by question key
// and item), shown only where the question is asked given the row's
// exported answers (the first question's Class, then the follow-ups' in
// order: cb.Asked), so that no item carries an answer to a question its
// parent answer rules out.
func addAnswers(st *store.Store, cb handoff.Codebook, rows []Row, machine map[string]map[string]handoff.MachineLabel) error {
	all := cb.All()
	cons := make([]map[string]handoff.Consensus, len(all))
	for q := 1; q < len(all); q++ {
		cs, _, err := round.StoredQuestionConsensus(st, all[q].Key)
		if err != nil && !errors.Is(err, round.ErrNothing) {
			return err
		}
		cons[q] = make(map[string]handoff.Consensus, len(cs))
		for _, c := range cs {
			cons[q][c.Item] = c
		}
	}
	order := round.QuestionOrder(cb)
	for i := range rows {
		r := &rows[i]
		r.Answers = make([]Answer, len(all)-1)
		given := map[string]string{}
		if r.Class != "" {
			given[cb.FirstKey()] = r.Class
		}
		for _, q := range order {
			if q == 0 {
				continue
			}
			a := Answer{Question: all[q].Key}
			if c, ok := cons[q][r.Item]; ok && c.Labels > 0 && cb.Asked(q, given) {
				a.Class, a.Source, a.Labels = c.Class, string(handoff.SourceCrowd), c.Labels
				if k, ok := cb.Sub(q).Index(c.Class); ok && k < len(c.Posterior) {
					a.Confidence = c.Posterior[k]
				}
				given[all[q].Key] = c.Class
			} else if m, ok := machine[all[q].Key][r.Item]; ok && cb.Asked(q, given) {
				a.Class, a.Source, a.Confidence = m.Class, string(handoff.SourceMachine), m.Confidence
				given[all[q].Key] = m.Class
			}
			r.Answers[q-1] = a
		}
	}
	return nil
}

// Write writes rows in format csv, jsonl or parquet. CSV has one column
// per codebook class for the posterior (p_KEY) and one per covariate
// (cov_NAME), in sorted order; in a question tree then, per follow-up
// question KEY in codebook order, KEY_label, KEY_source, KEY_confidence and
// KEY_labels (all four empty where the question is not asked or not
// answered yet). The first question keeps the plain column names.
func Write(w io.Writer, format string, rows []Row, classes []string) error {
	switch format {
	case "jsonl":
		bw := bufio.NewWriter(w)
		enc := json.NewEncoder(bw)
		for i := range rows {
			if err := enc.Encode(&rows[i]); err != nil {
				return err
			}
		}
		return bw.Flush()
	case "csv":
		return writeCSV(w, rows, classes)
	case "parquet":
		pw := parquet.NewGenericWriter[Row](w)
		if _, err := pw.Write(rows); err != nil {
			return err
		}
		return pw.Close()
	}
	return fmt.Errorf("unknown export format %q: want csv, jsonl or parquet", format)
}

func writeCSV(w io.Writer, rows []Row, classes []string) error {
	covs := map[string]bool{}
	for _, r := range rows {
		for k := range r.Covariates {
			covs[k] = true
		}
	}
	names := make([]string, 0, len(covs))
	for k := range covs {
		names = append(names, k)
	}
	sort.Strings(names)
	cw := csv.NewWriter(w)
	head := []string{"item", "kind", "class", "source", "confidence", "labels", "model", "round", "parent", "position"}
	for _, c := range classes {
		head = append(head, "p_"+c)
	}
	for _, n := range names {
		head = append(head, "cov_"+n)
	}
	var follow []string
	if len(rows) > 0 {
		for _, a := range rows[0].Answers {
			follow = append(follow, a.Question)
			head = append(head, a.Question+"_label", a.Question+"_source", a.Question+"_confidence", a.Question+"_labels")
		}
	}
	if err := cw.Write(SafeCells(head)); err != nil {
		return err
	}
	f := func(x float64) string { return strconv.FormatFloat(x, 'g', 10, 64) }
	for _, r := range rows {
		rec := []string{r.Item, r.Kind, r.Class, r.Source, f(r.Confidence), strconv.Itoa(r.Labels), r.Model, strconv.Itoa(r.Round), r.Parent, strconv.Itoa(r.Position)}
		for k := range classes {
			if k < len(r.Posterior) {
				rec = append(rec, f(r.Posterior[k]))
			} else {
				rec = append(rec, "")
			}
		}
		for _, n := range names {
			rec = append(rec, r.Covariates[n])
		}
		for q := range follow {
			a := r.Answers[q]
			if a.Source == "" {
				rec = append(rec, "", "", "", "")
				continue
			}
			rec = append(rec, a.Class, a.Source, f(a.Confidence), strconv.Itoa(a.Labels))
		}
		if err := cw.Write(SafeCells(rec)); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// WriteBatch writes a next batch for people in format csv (one row per
// item: item, reason, score, kind, text, path, parent, machine, crowd; the
// cells made safe to open in a spreadsheet, SafeCells) or jsonl (one
// round.BatchItem per line).
func WriteBatch(w io.Writer, format string, b []round.BatchItem) error {
	if format == "jsonl" {
		enc := json.NewEncoder(w)
		for i := range b {
			if err := enc.Encode(&b[i]); err != nil {
				return err
			}
		}
		return nil
	}
	cw := csv.NewWriter(w)
	// A questions column (keys separated by spaces; empty: the whole tree)
	// only when some item names questions, so one-question batches keep
	// their columns.
	named := slices.ContainsFunc(b, func(x round.BatchItem) bool { return len(x.Questions) > 0 })
	head := []string{"item", "reason", "score", "kind", "text", "path", "parent", "machine", "crowd"}
	if named {
		head = append(head, "questions")
	}
	cw.Write(head)
	for _, x := range b {
		row := []string{x.Item, x.Reason, strconv.FormatFloat(x.Score, 'g', 6, 64), x.Kind, x.Text, x.Path, x.Parent, x.Machine, x.Crowd}
		if named {
			row = append(row, strings.Join(x.Questions, " "))
		}
		cw.Write(SafeCells(row))
	}
	cw.Flush()
	return cw.Error()
}

// SafeCells makes the cells of one CSV record safe to open in a
// spreadsheet, in place, and returns rec: a cell that starts with =, +, -,
// @, a tab or a carriage return, and is not a plain number, gets a single
// quote in front, so that spreadsheet programs show it as text instead of
// running it as a formula (the OWASP guidance on CSV injection recommends
// this; common practice). Plain numbers such as -3.5 or +1e-3 are left as
// they are. JSON lines and Parquet exports are never changed.
func SafeCells(rec []string) []string {
	for i, c := range rec {
		if c == "" {
			continue
		}
		switch c[0] {
		case '=', '+', '-', '@', '\t', '\r':
			if !plainNumber.MatchString(c) {
				rec[i] = "'" + c
			}
		}
	}
	return rec
}

// plainNumber is a decimal number: sign, digits, point, exponent.
var plainNumber = regexp.MustCompile(`^[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?$`)

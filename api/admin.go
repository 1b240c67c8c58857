package api

import (
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"mime"
	"net/http"
	"sort"
	"strconv"
	"time"

	"github.com/labstack/echo/v4"

	"handoff"
	"handoff/crowd"
	"handoff/export"
	"handoff/ingest"
	"handoff/round"
	"handoff/store"
)

// StatusReply is the project at a glance. Stats.Annotators counts every
// annotator the project knows (people added for the service among them);
// Labellers those with at least one label.
type StatusReply struct {
	store.Stats
	Labellers int        `json:"labellers"`
	Scale     string     `json:"scale"`
	Pool      PoolStatus `json:"pool"`
	People    int        `json:"people"`
	Round     RoundJob   `json:"round_job"`
	Rounds    int        `json:"rounds"`
}

func (sv *Server) getStatus(c echo.Context) error {
	st, err := sv.st.Stats()
	if err != nil {
		return err
	}
	people, err := People(sv.st)
	if err != nil {
		return err
	}
	rounds, err := sv.st.Rounds()
	if err != nil {
		return err
	}
	labellers, err := sv.st.AnnotatorsWithLabels()
	if err != nil {
		return err
	}
	scale := string(handoff.Nominal)
	if cb := sv.st.Codebook(); cb.IsOrdinal() {
		scale = string(handoff.Ordinal)
	}
	return c.JSON(http.StatusOK, StatusReply{Stats: st, Labellers: labellers, Scale: scale, Pool: sv.pool.status(), People: len(people),
		Round: sv.rounds.job(), Rounds: len(rounds)})
}

// DayCount is the number of labels given on one UTC day.
type DayCount struct {
	Day    string `json:"day"` // YYYY-MM-DD
	Labels int    `json:"labels"`
}

func (sv *Server) getLabelsPerDay(c echo.Context) error {
	days := map[string]int{}
	unknown := 0
	err := sv.st.EachLabel(func(r *store.LabelRecord) error {
		if r.Time == 0 {
			unknown++
			return nil
		}
		days[time.Unix(0, r.Time).UTC().Format(time.DateOnly)]++
		return nil
	})
	if err != nil {
		return err
	}
	out := make([]DayCount, 0, len(days))
	for d, n := range days {
		out = append(out, DayCount{d, n})
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Day < out[j].Day })
	return c.JSON(http.StatusOK, map[string]any{"days": out, "without_time": unknown})
}

// PersonView is a person as the board lists them: the record (without the
// check items drawn for them), their tokens' ids, and where they stand in
// the practice gate.
type PersonView struct {
	ID      string       `json:"id"`
	Admin   bool         `json:"admin"`
	Created time.Time    `json:"created"`
	Check   CheckSummary `json:"check"`
	Tokens  []TokenInfo  `json:"tokens"`
}

func (sv *Server) peopleViews() ([]PersonView, error) {
	people, err := People(sv.st)
	if err != nil {
		return nil, err
	}
	toks, err := Tokens(sv.st)
	if err != nil {
		return nil, err
	}
	ts, err := sv.practiceItems()
	if err != nil {
		return nil, err
	}
	out := make([]PersonView, 0, len(people))
	for _, p := range people {
		v := PersonView{ID: p.ID, Admin: p.Admin, Created: p.Created, Check: sv.checkSummary(ts, p.Practice), Tokens: toks[p.ID]}
		if v.Tokens == nil {
			v.Tokens = []TokenInfo{}
		}
		out = append(out, v)
	}
	return out, nil
}

func (sv *Server) getPeople(c echo.Context) error {
	people, err := sv.peopleViews()
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, map[string]any{"people": people})
}

// PersonRequest is the body of POST /api/v1/people.
type PersonRequest struct {
	ID    string `json:"id"`
	Admin bool   `json:"admin"`
}

// postPeople adds a person and returns their token, shown this once.
func (sv *Server) postPeople(c echo.Context) error {
	var req PersonRequest
	if err := decodeJSON(c, &req); err != nil {
		return err
	}
	tok, err := AddPerson(sv.st, req.ID, req.Admin, sv.source(c))
	if errors.Is(err, ErrPersonExists) {
		return jsonError(http.StatusConflict, "%v", err)
	}
	if err != nil {
		if !personID.MatchString(req.ID) {
			return jsonError(http.StatusUnprocessableEntity, "%v", err)
		}
		return err
	}
	return c.JSON(http.StatusCreated, map[string]any{"id": req.ID, "admin": req.Admin, "token": tok})
}

// knownPerson reads the :id of the path and checks the person exists.
func (sv *Server) knownPerson(c echo.Context) (string, error) {
	id := c.Param("id")
	if _, err := sv.st.Person(id); errors.Is(err, store.ErrNotFound) {
		return "", jsonError(http.StatusNotFound, "no person %s in the project", quoteID(id))
	} else if err != nil {
		return "", err
	}
	return id, nil
}

// postPersonToken issues another token for a person (shown once).
func (sv *Server) postPersonToken(c echo.Context) error {
	id, err := sv.knownPerson(c)
	if err != nil {
		return err
	}
	tok, err := NewToken(sv.st, id, sv.source(c))
	if err != nil {
		return err
	}
	return c.JSON(http.StatusCreated, map[string]any{"id": id, "token": tok})
}

// deletePersonTokens revokes every token of a person: they are signed out
// at once and cannot sign in again until given a new token.
func (sv *Server) deletePersonTokens(c echo.Context) error {
	id, err := sv.knownPerson(c)
	if err != nil {
		return err
	}
	toks, err := Tokens(sv.st)
	if err != nil {
		return err
	}
	n, err := RevokePerson(sv.st, id, sv.source(c))
	if err != nil {
		return err
	}
	for _, t := range toks[id] {
		sv.auth.forgetToken(t.ID)
	}
	return c.JSON(http.StatusOK, map[string]any{"id": id, "revoked": n})
}

// deleteToken revokes one token by its id.
func (sv *Server) deleteToken(c echo.Context) error {
	id := c.Param("id")
	person, err := RevokeToken(sv.st, id, sv.source(c))
	if err != nil {
		if _, serr := sv.st.Token(id); errors.Is(serr, store.ErrNotFound) {
			return jsonError(http.StatusNotFound, "%v", err)
		}
		return err
	}
	sv.auth.forgetToken(id)
	return c.JSON(http.StatusOK, map[string]any{"token": id, "person": person, "revoked": 1})
}

// postPersonCheck grants a person one more check attempt (after they used
// up Config.CheckAttempts).
func (sv *Server) postPersonCheck(c echo.Context) error {
	id, err := sv.knownPerson(c)
	if err != nil {
		return err
	}
	ts, err := sv.practiceItems()
	if err != nil {
		return err
	}
	p, err := sv.auth.updatePerson(id, sv.source(c), func(p *Person) error {
		if st, _ := sv.stateOf(ts, p.Practice); st == stateLocked {
			p.Practice.Extra++
		}
		return nil
	})
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, map[string]any{"id": id, "check": sv.checkSummary(ts, p.Practice)})
}

// importFormat reads the body's format from its Content-Type: CSV
// (text/csv) or JSONL (application/jsonl, application/x-ndjson).
func importFormat(c echo.Context) (ingest.Format, error) {
	mt, _, err := mime.ParseMediaType(c.Request().Header.Get("Content-Type"))
	if err != nil {
		mt = ""
	}
	switch mt {
	case "text/csv":
		return ingest.CSV, nil
	case "application/jsonl", "application/x-ndjson", "application/x-jsonlines":
		return ingest.JSONL, nil
	}
	return "", jsonError(http.StatusUnsupportedMediaType, "send CSV (Content-Type: text/csv) or JSON lines (Content-Type: application/jsonl)")
}

// ImportReply says what an import added.
type ImportReply struct {
	Added   int `json:"added"`
	Updated int `json:"updated"`
}

func (sv *Server) postItems(c echo.Context) error {
	f, err := importFormat(c)
	if err != nil {
		return err
	}
	q := c.QueryParams()
	opt := ingest.ItemOptions{SplitSentences: q.Get("split") == "sentences"}
	if s := q.Get("split"); s != "" && s != "sentences" && s != "none" {
		return jsonError(http.StatusBadRequest, "split=%q: use split=sentences or split=none", s)
	}
	update := q.Get("update") == "true"
	r, err := ingest.NewItemReader(c.Request().Body, "request body", f, opt)
	if err != nil {
		return bodyError(err)
	}
	// Readers may see an import's rows before it lands or is rolled back:
	// forget the items' views afterwards, whatever the outcome.
	defer sv.views.clear()
	res, err := sv.st.ImportItems(sv.source(c), update, r.Next)
	if err != nil {
		return bodyError(err)
	}
	if err := sv.pool.rebuild(); err != nil {
		return err
	}
	return c.JSON(http.StatusOK, ImportReply{res.Added, res.Updated})
}

func (sv *Server) postLabelsImport(c echo.Context) error {
	f, err := importFormat(c)
	if err != nil {
		return err
	}
	cb := sv.st.Codebook()
	r, err := ingest.NewLabelReader(c.Request().Body, "request body", f, ingest.LabelOptions{Codebook: &cb})
	if err != nil {
		return bodyError(err)
	}
	res, err := sv.st.ImportLabels(sv.source(c), r.Next)
	if err != nil {
		return bodyError(err)
	}
	if err := sv.pool.rebuild(); err != nil {
		return err
	}
	return c.JSON(http.StatusOK, ImportReply{res.Added, res.Updated})
}

func (sv *Server) postGold(c echo.Context) error {
	f, err := importFormat(c)
	if err != nil {
		return err
	}
	cb := sv.st.Codebook()
	r, err := ingest.NewGoldReader(c.Request().Body, "request body", f, ingest.GoldOptions{Codebook: &cb, SourceField: "source"})
	if err != nil {
		return bodyError(err)
	}
	res, err := sv.st.ImportGold(sv.source(c), r.Next)
	if err != nil {
		return bodyError(err)
	}
	sv.forgetPractice()
	if err := sv.pool.rebuild(); err != nil {
		return err
	}
	return c.JSON(http.StatusOK, ImportReply{res.Added, res.Updated})
}

// bodyError turns a reader or import error into a 4xx: too large (413) or
// bad data (422, naming the line and field).
func bodyError(err error) error {
	var mb *http.MaxBytesError
	if errors.As(err, &mb) {
		return err
	}
	var ie *ingest.Error
	var de *store.DataError
	if errors.As(err, &ie) || errors.As(err, &de) {
		return jsonError(http.StatusUnprocessableEntity, "nothing was imported: %v", err)
	}
	return err
}

// agreement measures the crowd's agreement with itself over every label,
// after the default cleaning rules (round.Agreement): Fleiss' kappa,
// Krippendorff's alpha and each person's kappa against the others'
// majority, with bootstrap 95% intervals (200 replicates seeded by
// Config.Seed). The agreement between the machine and the crowd is in the
// verdict.
func (sv *Server) agreement() (*round.AgreementReport, error) {
	a, err := round.Agreement(sv.st, round.AgreementConfig{Rules: crowd.DefaultRules(), Reps: 200, Seed: sv.cfg.Seed})
	if errors.Is(err, round.ErrNothing) {
		return nil, codedError(http.StatusConflict, "nothing_yet", "%v", err)
	}
	return a, err
}

func (sv *Server) getAgreement(c echo.Context) error {
	a, err := sv.agreement()
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, a)
}

// AnnotatorRow is one line of the reliability table: labels given, kappa
// against the others' majority after the default cleaning rules (absent
// when undefined, before any labels, or when the rules dropped the person),
// mean seconds per label, unsure marks, the practice gate, and, from the
// latest stored consensus, the person's reliability there and why the
// cleaning rules dropped or flagged them.
type AnnotatorRow struct {
	Annotator   string          `json:"annotator"`
	Labels      int             `json:"labels"`
	Kappa       *crowd.Estimate `json:"kappa,omitempty"`
	MeanSecs    float64         `json:"mean_seconds,omitempty"`
	Unsure      int             `json:"unsure"`
	Check       *CheckSummary   `json:"check,omitempty"`
	Reliability *float64        `json:"reliability,omitempty"`
	// Dropped says why the cleaning rules of the latest consensus dropped
	// all of the person's labels ("gold-screen: …"); Flagged why a rule
	// flagged them without dropping; DroppedLabels counts the labels
	// dropped one by one.
	Dropped       string `json:"dropped,omitempty"`
	Flagged       string `json:"flagged,omitempty"`
	DroppedLabels int    `json:"dropped_labels,omitempty"`
}

func (sv *Server) getAnnotators(c echo.Context) error {
	t, err := sv.st.LabelTable(true)
	if err != nil {
		return err
	}
	rows := make([]AnnotatorRow, len(t.AnnotatorIDs))
	secs := make([]float64, len(t.AnnotatorIDs))
	timed := make([]int, len(t.AnnotatorIDs))
	ix := map[string]int{}
	for i, id := range t.AnnotatorIDs {
		rows[i].Annotator = id
		ix[id] = i
	}
	for i := range t.Annotator {
		x := t.Annotator[i]
		rows[x].Labels++
		if t.Seconds[i] > 0 {
			secs[x] += float64(t.Seconds[i])
			timed[x]++
		}
	}
	for i := range rows {
		if timed[i] > 0 {
			rows[i].MeanSecs = secs[i] / float64(timed[i])
		}
	}
	if t.Len() > 0 {
		a, err := sv.agreement()
		if err != nil {
			return err
		}
		for _, k := range a.LeaveOneOut {
			if i, ok := ix[k.ID]; ok && k.Kappa.Defined {
				e := k.Kappa
				rows[i].Kappa = &e
			}
		}
	}
	people, err := People(sv.st)
	if err != nil {
		return err
	}
	ts, err := sv.practiceItems()
	if err != nil {
		return err
	}
	for _, p := range people {
		i, ok := ix[p.ID]
		if !ok {
			ix[p.ID] = len(rows)
			i = len(rows)
			rows = append(rows, AnnotatorRow{Annotator: p.ID})
		}
		if !p.Admin || p.Practice.Attempts > 0 {
			cs := sv.checkSummary(ts, p.Practice)
			rows[i].Check = &cs
		}
	}
	if _, rep, err := round.StoredConsensus(sv.st); err == nil && rep != nil {
		for _, a := range rep.Annotators {
			if i, ok := ix[a.ID]; ok && a.Labels > 0 {
				r := a.Reliability
				rows[i].Reliability = &r
			}
		}
		for _, d := range rep.Drops {
			i, ok := ix[d.Annotator]
			if !ok {
				continue
			}
			why := d.Rule + ": " + d.Reason
			switch {
			case d.Flag:
				if rows[i].Flagged == "" {
					rows[i].Flagged = why
				}
			case d.Item == "" && rows[i].Dropped == "":
				rows[i].Dropped = why
			case d.Item != "":
				rows[i].DroppedLabels += d.Labels
			}
		}
	}
	if err := sv.st.EachUnsure(func(item, annotator string) error {
		if i, ok := ix[annotator]; ok {
			rows[i].Unsure++
		}
		return nil
	}); err != nil {
		return err
	}
	return c.JSON(http.StatusOK, map[string]any{"annotators": rows})
}

// UnsureItem is an item people marked unsure, with how many did.
type UnsureItem struct {
	Item   string `json:"item"`
	People int    `json:"people"`
}

func (sv *Server) getUnsure(c echo.Context) error {
	m, err := sv.st.UnsureCounts()
	if err != nil {
		return err
	}
	out := make([]UnsureItem, 0, len(m))
	for k, n := range m {
		out = append(out, UnsureItem{k, n})
	}
	sort.Slice(out, func(i, j int) bool {
		if out[i].People != out[j].People {
			return out[i].People > out[j].People
		}
		return out[i].Item < out[j].Item
	})
	return c.JSON(http.StatusOK, map[string]any{"items": out})
}

func (sv *Server) getNextBatch(c echo.Context) error {
	sels, err := sv.st.Selections()
	if err != nil {
		return err
	}
	if len(sels) == 0 {
		return c.JSON(http.StatusOK, map[string]any{"round": nil, "batch": []any{}})
	}
	last := sels[len(sels)-1]
	var v any
	if err := json.Unmarshal(last.Data, &v); err != nil {
		return fmt.Errorf("the stored next batch of round %d is not JSON: %w", last.N, err)
	}
	return c.JSON(http.StatusOK, map[string]any{"round": last.N, "batch": v})
}

// getExportLabels writes every crowd label, one row each: item, annotator,
// label, time, seconds — in CSV (the default) or JSON lines.
func (sv *Server) getExportLabels(c echo.Context) error {
	format := c.QueryParam("format")
	if format == "" {
		format = "csv"
	}
	if format != "csv" && format != "jsonl" {
		return jsonError(http.StatusBadRequest, "format=%q: use csv or jsonl", format)
	}
	t, err := sv.st.LabelTable(true)
	if err != nil {
		return err
	}
	w := c.Response()
	if format == "csv" {
		w.Header().Set("Content-Type", "text/csv; charset=utf-8")
	} else {
		w.Header().Set("Content-Type", "application/jsonl")
	}
	w.Header().Set("Content-Disposition", fmt.Sprintf("attachment; filename=labels.%s", format))
	w.WriteHeader(http.StatusOK)
	return writeLabels(w, t, format)
}

func writeLabels(w io.Writer, t *store.LabelTable, format string) error {
	when := func(i int) string {
		if t.Time[i] == 0 {
			return ""
		}
		return time.Unix(0, t.Time[i]).UTC().Format(time.RFC3339Nano)
	}
	if format == "csv" {
		cw := csv.NewWriter(w)
		head := []string{"item", "annotator", "label", "time", "seconds"}
		if t.Tree() { // a question tree: the question of each label (empty: the first)
			head = []string{"item", "annotator", "question", "label", "time", "seconds"}
		}
		if err := cw.Write(head); err != nil {
			return err
		}
		for i := range t.Item {
			secs := ""
			if t.Seconds[i] != 0 {
				secs = strconv.FormatFloat(float64(t.Seconds[i]), 'g', -1, 32)
			}
			q, class := t.Names(i)
			rec := []string{t.ItemIDs[t.Item[i]], t.AnnotatorIDs[t.Annotator[i]], class, when(i), secs}
			if t.Tree() {
				rec = []string{t.ItemIDs[t.Item[i]], t.AnnotatorIDs[t.Annotator[i]], q, class, when(i), secs}
			}
			if err := cw.Write(export.SafeCells(rec)); err != nil {
				return err
			}
		}
		cw.Flush()
		return cw.Error()
	}
	enc := json.NewEncoder(w)
	for i := range t.Item {
		q, class := t.Names(i)
		l := handoff.Label{Item: t.ItemIDs[t.Item[i]], Annotator: t.AnnotatorIDs[t.Annotator[i]], Question: q, Class: class,
			Seconds: float64(t.Seconds[i])}
		if t.Time[i] != 0 {
			l.Time = time.Unix(0, t.Time[i]).UTC()
		}
		if err := enc.Encode(l); err != nil {
			return err
		}
	}
	return nil
}

// getExport writes one row per item — final class, source, confidence,
// consensus posterior, labels, model, round, parent, covariates — in CSV
// (the default), JSON lines or Parquet (export.Rows, export.Write).
func (sv *Server) getExport(c echo.Context) error {
	format := c.QueryParam("format")
	if format == "" {
		format = "csv"
	}
	ctype := map[string]string{"csv": "text/csv; charset=utf-8", "jsonl": "application/jsonl", "parquet": "application/vnd.apache.parquet"}[format]
	if ctype == "" {
		return jsonError(http.StatusBadRequest, "format=%q: use csv, jsonl or parquet", format)
	}
	rows, err := export.Rows(sv.st)
	if err != nil {
		return err
	}
	w := c.Response()
	w.Header().Set("Content-Type", ctype)
	w.Header().Set("Content-Disposition", "attachment; filename=export."+format)
	w.WriteHeader(http.StatusOK)
	cb := sv.st.Codebook()
	return export.Write(w, format, rows, cb.Keys())
}

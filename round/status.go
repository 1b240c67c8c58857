package round

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"handoff/store"
)

// Section is one part of a project's status beyond the store's counts: Fn
// returns a value for the JSON form and the text lines, or nil and "" when
// it has nothing to say.
type Section struct {
	Name string
	Fn   func(st *store.Store) (jsonValue any, text string, err error)
}

// Sections are the status sections this package adds, in order: the stored
// consensus and the latest round.
var Sections = []Section{{"consensus", consensusStatus}, {"rounds", roundStatus}}

// Status is a project's status as `loop status` reports it: the store's
// counts and one entry per section with something to say.
type Status struct {
	store.Stats
	Sections map[string]any `json:"sections,omitempty"`
	text     string
}

// Text is the status as `loop status DIR` prints it.
func (s *Status) Text() string { return s.text }

// ProjectStatus returns the status of a project with the given sections
// (Sections, and any the caller adds).
func ProjectStatus(st *store.Store, sections []Section) (*Status, error) {
	stats, err := st.Stats()
	if err != nil {
		return nil, err
	}
	s := &Status{Stats: stats}
	var text strings.Builder
	text.WriteString(stats.String())
	for _, sec := range sections {
		v, t, err := sec.Fn(st)
		if err != nil {
			return nil, fmt.Errorf("status %s: %w", sec.Name, err)
		}
		if v == nil && t == "" {
			continue
		}
		if s.Sections == nil {
			s.Sections = map[string]any{}
		}
		s.Sections[sec.Name] = v
		if t != "" {
			fmt.Fprintf(&text, "%s:\n%s", sec.Name, indent(t))
		}
	}
	s.text = text.String()
	return s, nil
}

func consensusStatus(st *store.Store) (any, string, error) {
	_, r, err := StoredConsensus(st)
	if errors.Is(err, ErrNothing) {
		return nil, "", nil
	}
	if err != nil {
		return nil, "", err
	}
	v := map[string]any{
		"method": r.Config.Method, "items": r.Items, "labels_kept": r.LabelsKept,
		"no_labels": r.NoLabels, "uncertain": r.Uncertain, "uncertain_below": r.Config.Uncertain,
	}
	t := fmt.Sprintf("method %s; %d items still uncertain (posterior < %.2f); %d with no labels after cleaning\n",
		r.Config.Method, r.Uncertain, r.Config.Uncertain, r.NoLabels)
	cb := st.Codebook()
	if cb.Tree() {
		qs := map[string]any{}
		for _, x := range cb.All()[1:] {
			_, qr, err := StoredQuestionConsensus(st, x.Key)
			switch {
			case errors.Is(err, ErrNothing):
				t += fmt.Sprintf("question %s: no consensus yet\n", x.Key)
				continue
			case err != nil:
				return nil, "", err
			}
			qs[x.Key] = map[string]any{"items": qr.Items - qr.NoLabels, "uncertain": qr.Uncertain, "not_asked": qr.NotAsked, "method": qr.Model}
			t += fmt.Sprintf("question %s: %d items with a consensus (%d still uncertain), %d not asked (their parent's answer does not call for it)\n",
				x.Key, qr.Items-qr.NoLabels, qr.Uncertain, qr.NotAsked)
		}
		v["questions"] = qs
	}
	return v, t, nil
}

func roundStatus(st *store.Store) (any, string, error) {
	r, err := Latest(st)
	if err != nil {
		return nil, "", nil
	}
	v := map[string]any{"round": r.Round, "model": r.Model, "decision": r.Verdict.Decision, "held_out": r.HeldOut, "pool": r.Pool}
	t := fmt.Sprintf("latest round %d, model %s: %s\n", r.Round, r.Model, r.Verdict.Headline())
	if len(r.Questions) > 0 {
		sums := r.Summaries()
		v["questions"] = sums
		t += "questions (each with its own machine and verdict):\n"
		for _, q := range sums {
			for i, l := range q.Lines() {
				if i > 0 {
					l = "  " + l
				}
				t += "  " + l + "\n"
			}
		}
	}
	return v, t, nil
}

// WorkspaceProjects lists the subfolders of dir that hold a project, when
// dir itself holds none (a workspace, such as the one the demo builds).
func WorkspaceProjects(dir string) ([]string, error) {
	if _, err := os.Stat(store.Path(dir)); err == nil {
		return nil, nil
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		return nil, err
	}
	var out []string
	for _, e := range entries {
		if e.IsDir() {
			if _, err := os.Stat(store.Path(filepath.Join(dir, e.Name()))); err == nil {
				out = append(out, e.Name())
			}
		}
	}
	return out, nil
}

// Workspace is the status of a folder of projects: each project's, and the
// totals (annotators counted once across projects, by id).
type Workspace struct {
	Workspace   string             `json:"workspace"`
	Projects    map[string]*Status `json:"projects"`
	Items       int                `json:"items"`
	ItemsByKind map[string]int     `json:"items_by_kind"`
	Labels      int                `json:"labels"`
	Annotators  int                `json:"annotators"` // distinct ids across projects
	Gold        int                `json:"gold"`
	text        string
}

// Text is the workspace's status as `loop status DIR` prints it.
func (w *Workspace) Text() string { return w.text }

// WorkspaceStatus returns the status of the projects named (subfolders of
// dir), each opened with open and closed again.
func WorkspaceStatus(dir string, names []string, sections []Section, open func(dir string) (*store.Store, error)) (*Workspace, error) {
	w := &Workspace{Workspace: dir, Projects: map[string]*Status{}, ItemsByKind: map[string]int{}}
	people := map[string]bool{}
	var text strings.Builder
	for _, n := range names {
		st, err := open(filepath.Join(dir, n))
		if err != nil {
			return nil, err
		}
		s, err := ProjectStatus(st, sections)
		if err == nil {
			as, aerr := st.Annotators()
			for _, a := range as {
				people[a.ID] = true
			}
			err = aerr
		}
		st.Close()
		if err != nil {
			return nil, fmt.Errorf("%s: %w", n, err)
		}
		w.Projects[n] = s
		w.Items += s.Items
		for k, v := range s.ItemsByKind {
			w.ItemsByKind[k] += v
		}
		w.Labels += s.Stats.Labels
		w.Gold += s.Gold
		fmt.Fprintf(&text, "== %s\n%s\n", filepath.Join(dir, n), s.text)
	}
	w.Annotators = len(people)
	var kinds []string
	for _, k := range slices.Sorted(func(yield func(string) bool) {
		for k := range w.ItemsByKind {
			if !yield(k) {
				return
			}
		}
	}) {
		kinds = append(kinds, fmt.Sprintf("%s %d", k, w.ItemsByKind[k]))
	}
	fmt.Fprintf(&text, "== workspace %s: %d projects, %d items (%s), %d labels by %d annotators, %d gold\n",
		dir, len(names), w.Items, strings.Join(kinds, ", "), w.Labels, w.Annotators, w.Gold)
	w.text = text.String()
	return w, nil
}

package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"handoff"
	"handoff/store"
)

func init() { register(newStatusCmd) }

// statusReport is what `loop status --json` prints: the store's counts, then
// one entry per registered section (consensus, rounds, … as later steps add
// them with registerStatus).
type statusReport struct {
	store.Stats
	Sections map[string]any `json:"sections,omitempty"`
}

func newStatusCmd() *cobra.Command {
	var asJSON bool
	c := &cobra.Command{
		Use:   "status DIR",
		Short: "Summarise a project: items, labels, annotators, gold",
		Long: `status prints what the project holds: items by kind, how many items have
labels, the labels and annotators, the gold answers, and how many labels each
item has. Later steps (consensus, rounds) add their own sections.

Given a folder that holds projects in its subfolders (a workspace, such as
the one ` + "`loop demo`" + ` builds), it reports each project and the totals.`,
		Example: `  loop status proj
  loop status /tmp/handoff-demo      # a folder of projects: each, and the totals
  loop status proj --json | jq .labels`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if ws, err := workspaceProjects(args[0]); err == nil && len(ws) > 0 {
				return workspaceStatus(cmd, args[0], ws, asJSON)
			}
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			rep, text, err := projectStatus(s)
			if err != nil {
				return err
			}
			if asJSON {
				return printJSON(cmd, rep)
			}
			outf(cmd, "%s", text)
			return nil
		},
	}
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON instead of text")
	return c
}

// projectStatus returns a project's status report and its text form.
func projectStatus(s *store.Store) (statusReport, string, error) {
	st, err := s.Stats()
	if err != nil {
		return statusReport{}, "", err
	}
	rep := statusReport{Stats: st}
	var text strings.Builder
	text.WriteString(st.String())
	for _, sec := range statusSections {
		v, t, err := sec.fn(s)
		if err != nil {
			return rep, "", fmt.Errorf("status %s: %w", sec.name, err)
		}
		if v == nil && t == "" {
			continue
		}
		if rep.Sections == nil {
			rep.Sections = map[string]any{}
		}
		rep.Sections[sec.name] = v
		if t != "" {
			fmt.Fprintf(&text, "%s:\n%s", sec.name, indent(t))
		}
	}
	return rep, text.String(), nil
}

func indent(t string) string {
	lines := strings.Split(strings.TrimRight(t, "\n"), "\n")
	for i, l := range lines {
		lines[i] = "  " + l
	}
	return strings.Join(lines, "\n") + "\n"
}

// workspaceProjects lists the subfolders of dir that hold a project, when
// dir itself holds none.
func workspaceProjects(dir string) ([]string, error) {
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

// workspaceReport is `loop status --json` for a folder of projects.
type workspaceReport struct {
	Workspace   string                  `json:"workspace"`
	Projects    map[string]statusReport `json:"projects"`
	Items       int                     `json:"items"`
	ItemsByKind map[string]int          `json:"items_by_kind"`
	Labels      int                     `json:"labels"`
	Annotators  int                     `json:"annotators"` // distinct ids across projects
	Gold        int                     `json:"gold"`
}

func workspaceStatus(cmd *cobra.Command, dir string, names []string, asJSON bool) error {
	w := workspaceReport{Workspace: dir, Projects: map[string]statusReport{}, ItemsByKind: map[string]int{}}
	people := map[string]bool{}
	var text strings.Builder
	for _, n := range names {
		s, err := openStore(filepath.Join(dir, n))
		if err != nil {
			return err
		}
		rep, t, err := projectStatus(s)
		if err == nil {
			var as []handoff.Annotator
			as, err = s.Annotators()
			for _, a := range as {
				people[a.ID] = true
			}
		}
		s.Close()
		if err != nil {
			return fmt.Errorf("%s: %w", n, err)
		}
		w.Projects[n] = rep
		w.Items += rep.Items
		for k, v := range rep.ItemsByKind {
			w.ItemsByKind[k] += v
		}
		w.Labels += rep.Stats.Labels
		w.Gold += rep.Gold
		fmt.Fprintf(&text, "== %s\n%s\n", filepath.Join(dir, n), t)
	}
	w.Annotators = len(people)
	if asJSON {
		return printJSON(cmd, w)
	}
	fmt.Fprintf(&text, "== workspace %s: %d projects, %d items (", dir, len(names), w.Items)
	first := true
	for _, k := range sortedStrings(keysOf(w.ItemsByKind)) {
		if !first {
			text.WriteString(", ")
		}
		first = false
		fmt.Fprintf(&text, "%s %d", k, w.ItemsByKind[k])
	}
	fmt.Fprintf(&text, "), %d labels by %d annotators, %d gold\n", w.Labels, w.Annotators, w.Gold)
	outf(cmd, "%s", text.String())
	return nil
}

func keysOf[V any](m map[string]V) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	return out
}

// Package demo runs the whole job on an invented scenario (package sim),
// as a team would: it builds a workspace of two projects — sentences of
// volunteer reports, and particle images whose low magnification fools
// everyone alike — and for each runs rounds with the simulated crowd
// answering every batch until the verdict says GO (or the rounds run out),
// then autolabels, sends an audit sample back to the crowd, exports and
// rolls up. `loop demo` calls Run; so do end-to-end tests. The data is
// invented for demonstration only.
package demo

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"handoff"
	"handoff/export"
	"handoff/internal/atomicfile"
	"handoff/round"
	"handoff/sim"
	"handoff/store"
)

// Config says what demo to build. Zero values are defaults.
type Config struct {
	// Dir is the workspace folder; it must be new or empty.
	Dir string
	// Seed seeds the invented scenario and every round.
	Seed uint64
	// Rounds is the most rounds per project before giving up on GO (0
	// means 8).
	Rounds int
	// Only builds one project: "reports" or "particles" ("" both).
	Only string
	// Small builds a small scenario (250 reports, 80 images per
	// magnification instead of 1,000 and 400), for quick checks.
	Small bool
	// Source names who runs the demo in the projects' audit trails.
	Source string
	// Busy, when not nil, is called while the scenario is being invented
	// (it takes a few seconds); the function it returns is called when
	// that is done. The CLI shows a spinner.
	Busy func(what string) (done func())
}

// Projects are the demo's project names, in the order Run builds them.
var Projects = []string{"reports", "particles"}

// project is one project of the demo workspace, with the settings it
// stores (`loop config DIR` shows them).
type project struct {
	name     string
	kind     handoff.Kind
	codebook handoff.Codebook
	settings []round.Override
}

// Run builds the demo workspace in cfg.Dir and runs the job on each
// project, writing what happens, a line per step, to w, and a summary line
// per project at the end. It refuses a folder that is not empty.
func Run(cfg Config, w io.Writer) error {
	if cfg.Rounds <= 0 {
		cfg.Rounds = 8
	}
	if cfg.Only != "" && !slices.Contains(Projects, cfg.Only) {
		return fmt.Errorf("demo: no project %q; the demo has %s", cfg.Only, strings.Join(Projects, " and "))
	}
	if entries, err := os.ReadDir(cfg.Dir); err == nil && len(entries) > 0 {
		return fmt.Errorf("%s is not empty; give a new directory for the demo", cfg.Dir)
	}
	done := func() {}
	if cfg.Busy != nil {
		done = cfg.Busy("inventing the scenario")
	}
	reports, perMag := 1000, 400
	if cfg.Small {
		reports, perMag = 250, 80
	}
	d, err := sim.NewDemo(sim.DemoConfig{
		Dir:           filepath.Join(cfg.Dir, "images"),
		Text:          sim.TextConfig{Reports: reports},
		Images:        sim.ImageConfig{PerMagnification: perMag},
		Labelled:      0.4,
		LabelsPerItem: 7,
	}, cfg.Seed)
	done()
	if err != nil {
		return err
	}
	// Each demo team keeps its settings in its project: the defaults
	// (max-error 0.05 at 95% over all looks, the reference standard at
	// 0.99 or 9 labels), its seed, a reference lag of one round (its crowd
	// gives 7 labels a request, so a held-out item reaches the cap of 9
	// with its second request), and for the particles the debiasing by
	// magnification and a max-error of 0.1 (its images are harder).
	common := []round.Override{{Key: "seed", Value: fmt.Sprint(cfg.Seed)}, {Key: "reference-lag", Value: "1"}}
	projects := []project{
		{name: "reports", kind: handoff.KindText, codebook: sim.TopicCodebook(), settings: common},
		{name: "particles", kind: handoff.KindImage, codebook: sim.ParticleCodebook(), settings: append(slices.Clone(common),
			round.Override{Key: "debias", Value: "magnification"}, round.Override{Key: "reference-stratum", Value: "40"},
			round.Override{Key: "max-error", Value: "0.1"})},
	}
	r := &runner{d: d, w: w, rounds: cfg.Rounds, answer: 1}
	var summary []string
	for _, pr := range projects {
		if cfg.Only != "" && cfg.Only != pr.name {
			continue
		}
		line, err := r.project(filepath.Join(cfg.Dir, pr.name), pr, cfg.Source+" ["+pr.name+"]")
		if err != nil {
			return fmt.Errorf("%s: %w", pr.name, err)
		}
		summary = append(summary, line)
	}
	_, err = fmt.Fprintf(w, "\n%s\n", strings.Join(summary, "\n"))
	return err
}

// runner runs the demo's projects with one simulated crowd; answer counts
// the batches it has answered, so that each gets fresh simulated people.
type runner struct {
	d      *sim.Demo
	w      io.Writer
	rounds int
	answer int
}

func (r *runner) printf(format string, a ...any) { fmt.Fprintf(r.w, format, a...) }

// project makes one project and runs the job on it; it returns the
// project's summary line.
func (r *runner) project(dir string, pr project, src string) (string, error) {
	st, err := store.Create(dir, pr.codebook, src)
	if err != nil {
		return "", err
	}
	defer st.Close()
	items, labels, gold := r.d.Of(pr.kind)
	if _, err := st.PutItems(items, false, src); err != nil {
		return "", err
	}
	if _, err := st.PutLabels(labels, src); err != nil {
		return "", err
	}
	if _, err := st.PutGold(gold, src); err != nil {
		return "", err
	}
	if _, err := round.SetSettings(st, pr.settings, src); err != nil {
		return "", err
	}
	var set []string
	for _, o := range pr.settings {
		set = append(set, o.Key+" "+o.Value)
	}
	r.printf("%s: %d %s items, %d crowd labels, %d gold answers; settings stored: %s\n", pr.name, len(items), pr.kind, len(labels), len(gold), strings.Join(set, ", "))
	var res *round.Result
	for n := 1; n <= r.rounds; n++ {
		if res, err = round.RunWith(st, round.RunOptions{}, src); err != nil {
			return "", err
		}
		held := "no held-out item counts yet"
		if res.HeldOut > 0 {
			held = fmt.Sprintf("%d held-out items count, accuracy %.3f", res.HeldOut, res.Verdict.Agreement.Accuracy.Est)
		}
		r.printf("  round %d: trained on %d items, %s, %s\n", res.Round, res.Train.Rows, held, res.Verdict.Headline())
		if res.Verdict.Decision.Go || n == r.rounds {
			break
		}
		if err := r.label(st, res.Batch, src); err != nil {
			return "", err
		}
	}
	if db := res.Consensus.Debias; db != nil {
		r.printf("  debiased by %s (reference stratum %s): share of %s per stratum before → after:", db.Covariate, db.Reference, pr.codebook.Classes[1].Key)
		for _, s := range db.Strata {
			r.printf(" %s× %.2f→%.2f", s.Name, s.Before[1], s.After[1])
		}
		r.printf("\n")
	}
	if res.Verdict.Decision.Go {
		al, err := round.Autolabel(st, round.AutolabelConfig{}, src)
		if err != nil {
			return "", err
		}
		r.printf("  autolabel at %.3f: %d machine labels, %d left for people\n", al.Threshold, al.Labelled, al.Queued)
		audit, err := round.Next(st, round.NextConfig{Audit: 60}, src)
		if err != nil && !errors.Is(err, round.ErrNothing) {
			return "", err
		}
		if len(audit) > 0 {
			if err := r.label(st, audit, src); err != nil {
				return "", err
			}
		}
	} else {
		r.printf("  NOT YET after %d %s: nothing autolabelled; the crowd keeps labelling\n", res.Round, map[bool]string{true: "round", false: "rounds"}[res.Round == 1])
	}
	if err := r.codings(st, dir, pr, src); err != nil {
		return "", err
	}
	rep, err := round.Verdict(st, round.VerdictConfig{})
	if err != nil {
		return "", err
	}
	if rep.Audit != nil {
		r.printf("  audit of %d machine labels: error %.3f [%.3f, %.3f] against the crowd\n", rep.Audit.N, rep.Audit.Rate, rep.Audit.Lo, rep.Audit.Hi)
	}
	rows, err := export.Rows(st)
	if err != nil {
		return "", err
	}
	exp := filepath.Join(dir, "export.csv")
	if err := atomicfile.Write(exp, 0o666, func(w io.Writer) error { return export.Write(w, "csv", rows, pr.codebook.Keys()) }); err != nil {
		return "", err
	}
	html := filepath.Join(dir, "report.html")
	if err := atomicfile.Write(html, 0o666, func(w io.Writer) error { return rep.WriteHTML(w, "Handoff verdict — demo "+pr.name) }); err != nil {
		return "", err
	}
	ps, err := export.Rollup(rows, pr.codebook.Keys(), pr.codebook.IsOrdinal(), export.RollupConfig{Seed: 1})
	if err != nil {
		return "", err
	}
	r.printf("  exported %d items to %s; rolled up %d parents; report %s\n", len(rows), exp, len(ps), html)
	line := fmt.Sprintf("%-10s round %d %s", pr.name+":", res.Round, res.Verdict.Headline())
	if rep.Audit != nil {
		line += fmt.Sprintf("; audit error %.3f [%.3f, %.3f]", rep.Audit.Rate, rep.Audit.Lo, rep.Audit.Hi)
	}
	return line, nil
}

// label has the simulated crowd label a batch (7 labels an item) and
// stores the labels.
func (r *runner) label(st *store.Store, batch []round.BatchItem, src string) error {
	ids := make([]string, len(batch))
	for i, b := range batch {
		ids[i] = b.Item
	}
	ls, err := r.d.Answer(ids, 7, r.answer)
	r.answer++
	if err != nil {
		return err
	}
	_, err = st.PutLabels(ls, src)
	return err
}

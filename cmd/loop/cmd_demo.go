package main

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"github.com/spf13/cobra"

	"handoff"
	"handoff/round"
	"handoff/sim"
	"handoff/store"
)

func init() { register(newDemoCmd) }

// demoProject is one project of the demo workspace, with the settings it
// stores (`loop config DIR` shows them).
type demoProject struct {
	name     string
	kind     handoff.Kind
	codebook handoff.Codebook
	settings []round.Override
}

func newDemoCmd() *cobra.Command {
	var (
		seed   uint64
		rounds int
		only   string
		small  bool
	)
	c := &cobra.Command{
		Use:   "demo DIR",
		Short: "Build and run an invented demo: the whole job from crowd labels to export",
		Long: `demo builds a workspace of two invented projects in DIR and runs the whole job
on each:

  DIR/reports    sentences of a fictional river-care programme's volunteer
                 reports (pollution, wildlife, bank damage, litter, other)
  DIR/particles  synthetic microscope images of particles (cell, chain, rod,
                 debris) at 10×, 20× and 40×, where low magnification makes
                 chains look like rods to everyone

A simulated crowd (careful, average and careless people, spammers, and some
who resubmit the same items) labels part of each archive. Then, for each
project: rounds of consensus → train → next batch → verdict, with the
simulated crowd answering each batch; the particles' shared bias is corrected
by magnification; once the verdict says GO the machine labels the rest, a
random audit sample goes back to the crowd, and everything is exported and
rolled up. The data is invented for demonstration only.`,
		Example: `  loop demo /tmp/handoff-demo
  loop status /tmp/handoff-demo
  loop verdict /tmp/handoff-demo/reports --html report.html`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			dir := args[0]
			if entries, err := os.ReadDir(dir); err == nil && len(entries) > 0 {
				return fmt.Errorf("%s is not empty; give a new directory for the demo", dir)
			}
			return runDemo(cmd, dir, seed, rounds, only, small)
		},
	}
	c.Flags().Uint64Var(&seed, "seed", 1, "seed of the invented scenario and of every round")
	c.Flags().IntVar(&rounds, "rounds", 8, "most rounds per project before giving up on GO")
	c.Flags().StringVar(&only, "only", "", "build just one project: reports or particles")
	c.Flags().BoolVar(&small, "small", false, "a small scenario, for quick checks")
	return c
}

func runDemo(cmd *cobra.Command, dir string, seed uint64, maxRounds int, only string, small bool) error {
	imgDir := filepath.Join(dir, "images")
	bar := newProgress(cmd, -1, "inventing the scenario")
	reportsN, perMag := 1000, 400
	if small {
		reportsN, perMag = 250, 80
	}
	d, err := sim.NewDemo(sim.DemoConfig{
		Dir:           imgDir,
		Text:          sim.TextConfig{Reports: reportsN},
		Images:        sim.ImageConfig{PerMagnification: perMag},
		Labelled:      0.4,
		LabelsPerItem: 7,
	}, seed)
	bar.Finish()
	if err != nil {
		return err
	}
	sd := fmt.Sprint(seed)
	// Each demo team keeps its settings in its project: the defaults
	// (max-error 0.05 at 95% over all looks, the reference standard at
	// 0.99 or 9 labels), its seed, a reference lag of one round (its crowd
	// gives 7 labels a request, so a held-out item reaches the cap of 9
	// with its second request), and for the particles the debiasing by
	// magnification and a max-error of 0.1 (its images are harder).
	common := []round.Override{{Key: "seed", Value: sd}, {Key: "reference-lag", Value: "1"}}
	projects := []demoProject{
		{name: "reports", kind: handoff.KindText, codebook: sim.TopicCodebook(), settings: common},
		{name: "particles", kind: handoff.KindImage, codebook: sim.ParticleCodebook(), settings: append(slices.Clone(common),
			round.Override{Key: "debias", Value: "magnification"}, round.Override{Key: "reference-stratum", Value: "40"},
			round.Override{Key: "max-error", Value: "0.1"})},
	}
	answerRound := 1
	var summary []string
	for _, pr := range projects {
		if only != "" && only != pr.name {
			continue
		}
		line, err := demoProjectRun(cmd, d, filepath.Join(dir, pr.name), pr, maxRounds, &answerRound)
		if err != nil {
			return fmt.Errorf("%s: %w", pr.name, err)
		}
		summary = append(summary, line)
	}
	outf(cmd, "\n%s\n", strings.Join(summary, "\n"))
	hintf(cmd, "\nnext: loop status %s; loop verdict %s --html report.html\n", dir, filepath.Join(dir, "reports"))
	return nil
}

func demoProjectRun(cmd *cobra.Command, d *sim.Demo, dir string, pr demoProject, maxRounds int, answerRound *int) (string, error) {
	src := source(cmd) + " [" + pr.name + "]"
	st, err := store.Create(dir, pr.codebook, src)
	if err != nil {
		return "", err
	}
	defer st.Close()
	items, labels, gold := d.Of(pr.kind)
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
	outf(cmd, "%s: %d %s items, %d crowd labels, %d gold answers; settings stored: %s\n", pr.name, len(items), pr.kind, len(labels), len(gold), strings.Join(set, ", "))
	var res *round.Result
	for r := 1; r <= maxRounds; r++ {
		res, err = round.RunWith(st, round.RunOptions{}, src)
		if err != nil {
			return "", err
		}
		dec := res.Verdict.Decision
		held := "no held-out item counts yet"
		if res.HeldOut > 0 {
			held = fmt.Sprintf("%d held-out items count, accuracy %.3f", res.HeldOut, res.Verdict.Agreement.Accuracy.Est)
		}
		outf(cmd, "  round %d: trained on %d items, %s, %s\n", res.Round, res.Train.Rows, held, res.Verdict.Headline())
		if dec.Go || r == maxRounds {
			break
		}
		if err := demoAnswer(st, d, res.Batch, answerRound, src); err != nil {
			return "", err
		}
	}
	if db := res.Consensus.Debias; db != nil {
		outf(cmd, "  debiased by %s (reference stratum %s): share of %s per stratum before → after:", db.Covariate, db.Reference, pr.codebook.Classes[1].Key)
		for _, s := range db.Strata {
			outf(cmd, " %s× %.2f→%.2f", s.Name, s.Before[1], s.After[1])
		}
		outf(cmd, "\n")
	}
	if res.Verdict.Decision.Go {
		al, err := round.Autolabel(st, round.AutolabelConfig{}, src)
		if err != nil {
			return "", err
		}
		outf(cmd, "  autolabel at %.3f: %d machine labels, %d left for people\n", al.Threshold, al.Labelled, al.Queued)
		audit, err := round.Next(st, round.NextConfig{Audit: 60}, src)
		if err != nil && !errors.Is(err, round.ErrNothing) {
			return "", err
		}
		if len(audit) > 0 {
			if err := demoAnswer(st, d, audit, answerRound, src); err != nil {
				return "", err
			}
		}
	} else {
		outf(cmd, "  NOT YET after %d %s: nothing autolabelled; the crowd keeps labelling\n", res.Round, map[bool]string{true: "round", false: "rounds"}[res.Round == 1])
	}
	if err := demoCodings(cmd, st, d, dir, pr, answerRound, src); err != nil {
		return "", err
	}
	rep, err := round.Verdict(st, round.VerdictConfig{})
	if err != nil {
		return "", err
	}
	if rep.Audit != nil {
		outf(cmd, "  audit of %d machine labels: error %.3f [%.3f, %.3f] against the crowd\n", rep.Audit.N, rep.Audit.Rate, rep.Audit.Lo, rep.Audit.Hi)
	}
	rows, err := round.Rows(st)
	if err != nil {
		return "", err
	}
	exp := filepath.Join(dir, "export.csv")
	if err := writeFileAtomic(exp, func(f *os.File) error { return round.WriteRows(f, "csv", rows, pr.codebook.Keys()) }); err != nil {
		return "", err
	}
	html := filepath.Join(dir, "report.html")
	if err := writeFileAtomic(html, func(f *os.File) error { return rep.WriteHTML(f, "Handoff verdict — demo "+pr.name) }); err != nil {
		return "", err
	}
	ps, err := round.Rollup(rows, pr.codebook.Keys(), pr.codebook.IsOrdinal(), round.RollupConfig{Seed: 1})
	if err != nil {
		return "", err
	}
	outf(cmd, "  exported %d items to %s; rolled up %d parents; report %s\n", len(rows), exp, len(ps), html)
	line := fmt.Sprintf("%-10s round %d %s", pr.name+":", res.Round, res.Verdict.Headline())
	if rep.Audit != nil {
		line += fmt.Sprintf("; audit error %.3f [%.3f, %.3f]", rep.Audit.Rate, rep.Audit.Lo, rep.Audit.Hi)
	}
	return line, nil
}

// demoAnswer has the simulated crowd label a batch and stores the labels.
func demoAnswer(st *store.Store, d *sim.Demo, batch []round.BatchItem, answerRound *int, src string) error {
	ids := make([]string, len(batch))
	for i, b := range batch {
		ids[i] = b.Item
	}
	ls, err := d.Answer(ids, 7, *answerRound)
	*answerRound++
	if err != nil {
		return err
	}
	_, err = st.PutLabels(ls, src)
	return err
}

// writeFileAtomic writes path through a temporary file renamed into place.
func writeFileAtomic(path string, fn func(f *os.File) error) error {
	tmp := path + ".partial"
	f, err := os.Create(tmp)
	if err != nil {
		return err
	}
	if err := fn(f); err != nil {
		f.Close()
		os.Remove(tmp)
		return err
	}
	if err := f.Close(); err != nil {
		os.Remove(tmp)
		return err
	}
	return os.Rename(tmp, path)
}

package sim

import (
	"fmt"
	"path/filepath"

	"handoff"
)

// DemoConfig sets the demo scenario. Zero fields take the defaults shown.
type DemoConfig struct {
	Dir    string      // directory for the image files (required)
	Text   TextConfig  // default: 600 reports (about 2,300 sentences)
	Images ImageConfig // default: 200 images at each of 10×, 20×, 40×; its Dir is ignored
	Crowd  CrowdConfig // default: 40 annotators, DefaultMix, half the spammers one-class
	// LabelsPerItem is the number of distinct annotators per labelled item
	// (default 5).
	LabelsPerItem int
	// Labelled is the share of items the crowd labels before the first
	// round (default 0.7), stratified as in RunConfig; the rest form the
	// archive for the machine and for next batches.
	Labelled float64
	// Gold is the share of labelled items with expert answers (default 0.05).
	Gold float64
}

// Demo is the default demo scenario: the river-care report sentences and the
// water-sample images, one crowd that labelled a share of both, and gold
// answers for a few.
//
// With the defaults it has about 2,900 items (about 2,300 sentences and 600
// images), about 11,000 round-0 labels from 40 annotators on 70% of the items,
// and about 100 gold items; it takes about 3 CPU-seconds to generate (mostly
// drawing and writing the PNG files, spread over all cores).
type Demo struct {
	Text   *TextSet
	Images *ImageSet
	Crowd  *Crowd

	// Codebook is CombinedCodebook: one project holding both kinds of item.
	// For two projects, use TopicCodebook for the items of kind text (IDs
	// "rep-…") and ParticleCodebook for the images (IDs "img-…"); the
	// labels and gold split the same way.
	Codebook handoff.Codebook
	Items    []handoff.Item    // sentences, then images
	Labels   []handoff.Label   // round 0: sentences, then images
	Gold     []handoff.Gold    // sentences, then images
	Truth    map[string]string // item ID → true class key, every item
	Types    map[string]Type   // annotator ID → true type

	tasks map[string]demoTask
	mags  []int
}

type demoTask struct {
	task  Task
	image bool
}

// NewDemo generates the demo scenario: the text and image sets (images
// written under cfg.Dir), the crowd, and the crowd's round-0 labels and gold
// for both (Crowd.Run with the topic codebook and no bias for sentences, the
// particle codebook and ImageBias for images). Deterministic given cfg and
// seed; the text, images and crowd use seeds derived from seed.
func NewDemo(cfg DemoConfig, seed uint64) (*Demo, error) {
	if cfg.Dir == "" {
		return nil, fmt.Errorf("sim: demo: no directory given for the image files")
	}
	if cfg.Crowd == (CrowdConfig{}) {
		cfg.Crowd.OneClassSpammers = 0.5
	}
	if cfg.LabelsPerItem == 0 {
		cfg.LabelsPerItem = 5
	}
	if cfg.Labelled == 0 {
		cfg.Labelled = 0.7
	}
	if cfg.Gold == 0 {
		cfg.Gold = 0.05
	}
	ts, err := GenerateText(cfg.Text, derive(seed, 1))
	if err != nil {
		return nil, err
	}
	icfg := cfg.Images
	icfg.Dir = filepath.Clean(cfg.Dir)
	is, err := RenderImages(icfg, derive(seed, 2))
	if err != nil {
		return nil, err
	}
	crowd, err := NewCrowd(cfg.Crowd, derive(seed, 3))
	if err != nil {
		return nil, err
	}
	run := RunConfig{LabelsPerItem: cfg.LabelsPerItem, Labelled: cfg.Labelled, Gold: cfg.Gold}
	tr, err := crowd.Run(TopicCodebook(), nil, ts.TopicTasks, run)
	if err != nil {
		return nil, err
	}
	ir, err := crowd.Run(ParticleCodebook(), ImageBias(icfg.withDefaults().Magnifications), is.Tasks, run)
	if err != nil {
		return nil, err
	}
	d := &Demo{
		Text: ts, Images: is, Crowd: crowd,
		Codebook: CombinedCodebook(),
		Items:    append(append([]handoff.Item{}, ts.Items...), is.Items...),
		Labels:   append(tr.Labels, ir.Labels...),
		Gold:     append(tr.Gold, ir.Gold...),
		Truth:    make(map[string]string, len(ts.Items)+len(is.Items)),
		Types:    crowd.Types(),
		tasks:    make(map[string]demoTask, len(ts.Items)+len(is.Items)),
	}
	for _, t := range ts.TopicTasks {
		d.Truth[t.Item] = t.Truth
		d.tasks[t.Item] = demoTask{task: t}
	}
	for _, t := range is.Tasks {
		d.Truth[t.Item] = t.Truth
		d.tasks[t.Item] = demoTask{task: t, image: true}
	}
	d.mags = icfg.withDefaults().Magnifications
	return d, nil
}

// Answer has the demo crowd label a next batch in round round (use 1, 2, …
// after the round-0 labels): labelsPerItem further distinct annotators for
// every item ID, as Crowd.Answer. The labels come sentences first, then
// images, each in the order given. An unknown ID is an error.
func (d *Demo) Answer(ids []string, labelsPerItem, round int) ([]handoff.Label, error) {
	var text, img []Task
	for i, id := range ids {
		t, ok := d.tasks[id]
		switch {
		case !ok:
			return nil, fmt.Errorf("sim: demo answer: ids[%d] = %q is not a demo item", i, id)
		case t.image:
			img = append(img, t.task)
		default:
			text = append(text, t.task)
		}
	}
	a, err := d.Crowd.Answer(TopicCodebook(), nil, text, labelsPerItem, round)
	if err != nil {
		return nil, err
	}
	b, err := d.Crowd.Answer(ParticleCodebook(), ImageBias(d.mags), img, labelsPerItem, round)
	if err != nil {
		return nil, err
	}
	return append(a, b...), nil
}

// Of returns the demo's items of one kind with their round-0 labels and gold
// answers — one project's worth (sentences for TopicCodebook, images for
// ParticleCodebook).
func (d *Demo) Of(kind handoff.Kind) ([]handoff.Item, []handoff.Label, []handoff.Gold) {
	var items []handoff.Item
	ids := map[string]bool{}
	for _, it := range d.Items {
		if it.Kind == kind {
			items = append(items, it)
			ids[it.ID] = true
		}
	}
	var labels []handoff.Label
	for _, l := range d.Labels {
		if ids[l.Item] {
			labels = append(labels, l)
		}
	}
	var gold []handoff.Gold
	for _, g := range d.Gold {
		if ids[g.Item] {
			gold = append(gold, g)
		}
	}
	return items, labels, gold
}

package crowd_test

import (
	"math"
	"testing"

	"handoff/crowd"
	"handoff/sim"
)

// The demo microscope images (sim, invented data): at low magnification
// everyone sees many chains as rods. The true class mix is the same at every
// magnification, so the highest magnification serves as the reference
// stratum; the correction must recover the true class shares per
// magnification within 3 points.
func TestDebiasSimMicroscope(t *testing.T) {
	if testing.Short() {
		t.Skip("renders images")
	}
	set, err := sim.RenderImages(sim.ImageConfig{Dir: t.TempDir(), Size: 48}, 1)
	if err != nil {
		t.Fatal(err)
	}
	cb := sim.ParticleCodebook()
	mags := []int{10, 20, 40}
	c, err := sim.NewCrowd(sim.CrowdConfig{}, 2)
	if err != nil {
		t.Fatal(err)
	}
	res, err := c.Run(cb, sim.ImageBias(mags), set.Tasks, sim.RunConfig{LabelsPerItem: 5})
	if err != nil {
		t.Fatal(err)
	}
	ids := make([]string, len(set.Items))
	magOf := make([]string, len(set.Items))
	for i, it := range set.Items {
		ids[i] = it.ID
		magOf[i] = it.Covariates["magnification"]
	}
	l, _, err := crowd.Build(res.Labels, &cb, ids)
	if err != nil {
		t.Fatal(err)
	}
	l, _, err = crowd.Clean(l, nil, crowd.DefaultRules())
	if err != nil {
		t.Fatal(err)
	}
	r, err := crowd.DawidSkene(l, crowd.Options{})
	if err != nil {
		t.Fatal(err)
	}
	s := crowd.CategoricalStrata(magOf)
	ref := -1
	for i, n := range s.Names {
		if n == "40" {
			ref = i
		}
	}
	d, err := crowd.Debias(r.Posterior, len(cb.Classes), s, crowd.DebiasOptions{Reference: ref, Prior: r.Prior})
	if err != nil {
		t.Fatal(err)
	}
	chain, _ := cb.Index("chain")
	for st, name := range s.Names {
		truth := set.Shares[name]
		t.Logf("magnification %s×: before %.3f, after %.3f, truth %.3f", name, d.Before[st], d.After[st], truth)
		for k := range truth {
			if math.Abs(d.After[st][k]-truth[k]) > 0.03 {
				t.Errorf("magnification %s×, class %s: corrected share %.3f, truth %.3f", name, cb.Classes[k].Key, d.After[st][k], truth[k])
			}
		}
	}
	// The bias was real: fewer chains at 10× than at 40× before correction.
	if d.Before[lo(s, "10")][chain] > d.Before[ref][chain]-0.04 {
		t.Errorf("chain share before correction: %.3f at 10×, %.3f at 40×; the simulated bias should show", d.Before[lo(s, "10")][chain], d.Before[ref][chain])
	}
}

func lo(s crowd.Strata, name string) int {
	for i, n := range s.Names {
		if n == name {
			return i
		}
	}
	return -1
}

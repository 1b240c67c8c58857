package verdict_test

import (
	"testing"

	honest "handoff/bench/verdict"
)

// TestHonestBound is issue 5's "an honest bound" (small version; the large
// one is bench/verdict, results in bench/verdict/RESULTS.md): over 300
// simulated projects with known truth (invented data from a seeded
// generator of calibrated-but-imperfect models, see package honest), the
// realised error of the autolabelled archive exceeds max-error in at most
// 5% of GO verdicts at a nominal 95% bound (Bates et al. 2021;
// Angelopoulos et al. 2021, "Learn then Test").
func TestHonestBound(t *testing.T) {
	res, err := honest.Run(300, 5000, 0.05, 0.95, 1)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("%+v", res)
	if res.Go < 100 {
		t.Fatalf("only %d GO verdicts in %d projects: the simulation does not exercise the bound", res.Go, res.Projects)
	}
	if rate := float64(res.Exceed) / float64(res.Go); rate > 0.05 {
		t.Errorf("realised archive error above max-error in %d of %d GO verdicts (%.1f%% > 5%%)", res.Exceed, res.Go, 100*rate)
	}
	// The plug-in rule without a bound should do visibly worse; if it does
	// not, the simulated projects are too easy to tell the two apart.
	if res.NaiveExceed <= res.Exceed {
		t.Errorf("plug-in rule exceeded max-error %d times, the bound %d: the simulation is too easy", res.NaiveExceed, res.Exceed)
	}
}

package features

import (
	"os"
	"path/filepath"
	"testing"
)

// BenchmarkImageFiles featurises the PNGs in $FEATURES_BENCH_IMAGES (written
// by bench/features); it is skipped when that is unset.
func BenchmarkImageFiles(b *testing.B) {
	dir := os.Getenv("FEATURES_BENCH_IMAGES")
	if dir == "" {
		b.Skip("FEATURES_BENCH_IMAGES not set")
	}
	paths, _ := filepath.Glob(filepath.Join(dir, "*.png"))
	c := DefaultImageConfig()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := c.TransformFiles(paths[:200]); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(200*b.N)/b.Elapsed().Seconds(), "images/s")
}

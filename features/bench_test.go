package features

import (
	"os"
	"path/filepath"
	"strings"
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

// BenchmarkTextFit fits the default vectoriser (min_df 2) on the lines of
// $FEATURES_BENCH_TEXTS; it is skipped when that is unset.
func BenchmarkTextFit(b *testing.B) {
	texts := benchTexts(b)
	cfg := DefaultTextConfig()
	cfg.MinDF = 2
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := cfg.Fit(texts); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkTextTransform transforms the lines of $FEATURES_BENCH_TEXTS.
func BenchmarkTextTransform(b *testing.B) {
	texts := benchTexts(b)
	cfg := DefaultTextConfig()
	cfg.MinDF = 2
	v, err := cfg.Fit(texts)
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		v.Transform(texts)
	}
	b.ReportMetric(float64(len(texts)*b.N)/b.Elapsed().Seconds(), "texts/s")
}

func benchTexts(b *testing.B) []string {
	path := os.Getenv("FEATURES_BENCH_TEXTS")
	if path == "" {
		b.Skip("FEATURES_BENCH_TEXTS not set")
	}
	data, err := os.ReadFile(path)
	if err != nil {
		b.Fatal(err)
	}
	return strings.Split(strings.TrimRight(string(data), "\n"), "\n")
}

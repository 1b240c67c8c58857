package autolabel

import (
	"flag"
	"log/slog"
	"os"
	"testing"

	"github.com/apache/beam/sdks/v2/go/pkg/beam"
)

// tempDirs are removed when the tests end.
var tempDirs []string

// TestMain initialises Beam, as a pipeline's main must before building or
// running a pipeline (Prism runs the workers in this process, in loopback
// mode).
func TestMain(m *testing.M) {
	flag.Parse()
	// Prism and the SDK log every job at level INFO; keep warnings and errors.
	slog.SetLogLoggerLevel(slog.LevelWarn)
	beam.Init()
	code := m.Run()
	for _, d := range tempDirs {
		os.RemoveAll(d)
	}
	os.Exit(code)
}

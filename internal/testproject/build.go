package testproject

import (
	"os"
	"os/exec"
	"path/filepath"
	"testing"
)

// BuildLoop builds the loop command into a temporary directory of the test
// and returns the binary's path, for tests that run it as a separate
// process (a server killed mid-write, commands beside a running server).
func BuildLoop(t testing.TB) string {
	t.Helper()
	bin := filepath.Join(t.TempDir(), "loop")
	cmd := exec.Command("go", "build", "-o", bin, "handoff/cmd/loop")
	cmd.Stderr = os.Stderr
	if err := cmd.Run(); err != nil {
		t.Fatalf("go build handoff/cmd/loop: %v", err)
	}
	return bin
}

package verdict

import (
	"os"
	"testing"
)

func TestScratchHTML(t *testing.T) {
	_, page := htmlReport(t, tenClasses, 30, false)
	os.WriteFile("/tmp/rep.html", []byte(page), 0o644)
	_, page = htmlReport(t, []string{"a","b","c"}, 60, true)
	os.WriteFile("/tmp/rep2.html", []byte(page), 0o644)
}

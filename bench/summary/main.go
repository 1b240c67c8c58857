// Command summary writes bench/README.md: one table gathered from the
// "## Summary" table at the end of every bench/<area>/RESULTS.md.
package main

import (
	"bufio"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"
)

func main() {
	files, _ := filepath.Glob("bench/*/RESULTS.md")
	sort.Strings(files)
	fmt.Println("# Benchmarks")
	fmt.Println()
	fmt.Println("Written by `make bench` (bench/run.sh) from the \"Summary\" table (or the")
	fmt.Println("figure | ours | peer | ratio | target | result tables) of each")
	fmt.Println("bench/AREA/RESULTS.md; each area's RESULTS.md has the details, the machine, the")
	fmt.Println("date and how to run it alone (`BENCH=area make bench`). Every figure was measured")
	fmt.Println("side by side with its peer in one run; ratios are ours over the peer's (for times,")
	fmt.Println("the peer's over ours), so above 1 is better for us. \"short\" marks a target not met.")
	fmt.Println()
	fmt.Println("| area | figure | ours | peer | ratio | target | result |")
	fmt.Println("| --- | --- | --- | --- | --- | --- | --- |")
	for _, f := range files {
		area := filepath.Base(filepath.Dir(f))
		rows, err := summary(f)
		if err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(1)
		}
		if len(rows) == 0 {
			fmt.Printf("| %s | (no summary table in %s) | | | | | |\n", area, f)
		}
		for _, r := range rows {
			fmt.Printf("| %s | %s |\n", area, strings.Join(r, " | "))
		}
	}
}

// summary reads the rows of the table under "## Summary" in path or, when
// there is none, of every table whose header is "figure | ours | peer |
// ratio | target | result" (any name for the first column).
func summary(path string) ([][]string, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var marked, matching [][]string
	section := ""
	inTable, take := false, false
	sc := bufio.NewScanner(strings.NewReader(string(b)))
	for sc.Scan() {
		l := strings.TrimSpace(sc.Text())
		if strings.HasPrefix(l, "## ") {
			section = strings.ToLower(strings.TrimPrefix(l, "## "))
			inTable = false
			continue
		}
		if !strings.HasPrefix(l, "|") {
			inTable = false
			continue
		}
		cells := strings.Split(strings.Trim(l, "|"), "|")
		for i := range cells {
			cells[i] = strings.TrimSpace(cells[i])
		}
		if !inTable { // a header row
			inTable = true
			take = section == "summary" || standard(cells)
			continue
		}
		if !take || strings.HasPrefix(cells[0], "---") {
			continue
		}
		for len(cells) < 6 {
			cells = append(cells, "")
		}
		if section == "summary" {
			marked = append(marked, cells[:6])
		} else {
			matching = append(matching, cells[:6])
		}
	}
	if len(marked) > 0 {
		return marked, sc.Err()
	}
	return matching, sc.Err()
}

// standard reports whether a header row is figure | ours | peer | ratio |
// target | result.
func standard(h []string) bool {
	if len(h) != 6 {
		return false
	}
	for i, w := range []string{"ours", "peer", "ratio", "target", "result"} {
		if !strings.HasPrefix(strings.ToLower(h[i+1]), w) {
			return false
		}
	}
	return true
}

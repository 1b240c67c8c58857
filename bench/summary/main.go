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
	fmt.Println("Written by `make bench` (bench/run.sh) from the \"Summary\" table of each")
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

// summary reads the rows of the table under "## Summary" in path.
func summary(path string) ([][]string, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	var rows [][]string
	in, header := false, 0
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		l := strings.TrimSpace(sc.Text())
		if strings.HasPrefix(l, "## ") {
			in = strings.EqualFold(strings.TrimPrefix(l, "## "), "Summary")
			header = 0
			continue
		}
		if !in || !strings.HasPrefix(l, "|") {
			continue
		}
		header++
		if header <= 2 { // the header row and its rule
			continue
		}
		cells := strings.Split(strings.Trim(l, "|"), "|")
		for i := range cells {
			cells[i] = strings.TrimSpace(cells[i])
		}
		for len(cells) < 6 {
			cells = append(cells, "")
		}
		rows = append(rows, cells[:6])
	}
	return rows, sc.Err()
}

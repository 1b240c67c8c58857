package round

import (
	"fmt"
	"strings"
	"text/tabwriter"
	"time"

	"handoff"
	"handoff/store"
)

// ReferenceRow is one stored reference coding as `loop reference list`
// shows it: its name, whether it codes items or parents, its rows, where it
// came from and when it was added (RFC 3339, UTC; empty when unknown).
type ReferenceRow struct {
	Name   string                `json:"name"`
	Kind   handoff.ReferenceKind `json:"kind"`
	Rows   int                   `json:"rows"`
	Source string                `json:"source"`
	Added  string                `json:"added,omitempty"`
}

// References lists the project's reference codings, and their table as
// text (a hint on how to add one when there is none; dir names the
// project in it).
func References(st *store.Store, dir string) ([]ReferenceRow, string, error) {
	refs, err := st.References()
	if err != nil {
		return nil, "", err
	}
	rows := []ReferenceRow{}
	for _, r := range refs {
		x := ReferenceRow{Name: r.Name, Kind: r.Kind(), Rows: r.Len(), Source: r.Source}
		if !r.Added.IsZero() {
			x.Added = r.Added.UTC().Format(time.RFC3339)
		}
		rows = append(rows, x)
	}
	if len(rows) == 0 {
		return rows, fmt.Sprintf("no reference codings yet; add one with `loop reference add %s FILE --name NAME`\n", dir), nil
	}
	var b strings.Builder
	tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "name\tcodes\trows\tsource\tadded")
	for _, r := range rows {
		fmt.Fprintf(tw, "%s\t%s\t%d\t%s\t%s\n", r.Name, r.Kind, r.Rows, r.Source, r.Added)
	}
	tw.Flush()
	return rows, b.String(), nil
}

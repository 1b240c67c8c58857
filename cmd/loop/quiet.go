package main

import (
	"fmt"

	"github.com/spf13/cobra"
)

// donef confirms on stdout, unless --quiet, a change that only echoes what
// was asked (a project created, a setting changed): such a confirmation is
// not a result. Results — reports, tokens, tables, and the counts of an
// import or a revocation, which say what actually changed — are written
// with outf whatever --quiet says.
func donef(cmd *cobra.Command, format string, a ...any) {
	if !quiet(cmd) {
		fmt.Fprintf(cmd.OutOrStdout(), format, a...)
	}
}

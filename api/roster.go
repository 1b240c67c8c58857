package api

import (
	"fmt"
	"strings"

	"handoff/store"
)

// RosterEntry is a person with the ids of their tokens (never the tokens:
// only their hashes are kept), as `loop people list` shows them.
type RosterEntry struct {
	Person
	Tokens []TokenInfo `json:"tokens"`
}

// Roster returns every person of the project with their token ids, by id.
// The current check attempt's items are left out.
func Roster(st *store.Store) ([]RosterEntry, error) {
	people, err := People(st)
	if err != nil {
		return nil, err
	}
	toks, err := Tokens(st)
	if err != nil {
		return nil, err
	}
	rows := make([]RosterEntry, 0, len(people))
	for _, p := range people {
		t := toks[p.ID]
		if t == nil {
			t = []TokenInfo{}
		}
		p.Practice.CheckItems = nil
		rows = append(rows, RosterEntry{p, t})
	}
	return rows, nil
}

// RosterText is the roster as `loop people list` prints it: a line per
// person with id, role, where they stand in the practice and the check,
// token ids and the day they were added.
func RosterText(rows []RosterEntry) string {
	w, cw := 0, 0
	for _, r := range rows {
		w = max(w, len(r.ID))
		cw = max(cw, len(CheckWords(r.Practice)))
	}
	var b strings.Builder
	for _, r := range rows {
		role := "annotator"
		if r.Admin {
			role = "admin"
		}
		ids := make([]string, len(r.Tokens))
		for i, t := range r.Tokens {
			ids[i] = t.ID
		}
		tokens := "no tokens (revoked)"
		if len(ids) > 0 {
			tokens = "tokens " + strings.Join(ids, ", ")
		}
		fmt.Fprintf(&b, "%-*s  %-9s  %-*s  %s  since %s\n", w, r.ID, role, cw, CheckWords(r.Practice), tokens, r.Created.Format("2006-01-02"))
	}
	return b.String()
}

// CheckWords says in words where a person stands in the practice gate,
// from their record alone (the server's settings decide the rest).
func CheckWords(p PracticeState) string {
	switch {
	case p.Passed:
		return "check passed"
	case p.Attempts == 1:
		return "check not passed (1 attempt)"
	case p.Attempts > 1:
		return fmt.Sprintf("check not passed (%d attempts)", p.Attempts)
	case p.Done > 0 || p.CheckDone > 0:
		return "practising"
	}
	return "not started"
}

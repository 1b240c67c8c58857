package main

import (
	"github.com/spf13/cobra"

	"handoff/api"
)

func init() {
	groupShort["people"] = "Manage who may use the labelling page, the board and the API"
	registerUnder("people", newPeopleAddCmd)
	registerUnder("people", newPeopleTokenCmd)
	registerUnder("people", newPeopleListCmd)
	registerUnder("people", newPeopleRevokeCmd)
}

func newPeopleAddCmd() *cobra.Command {
	var admin bool
	c := &cobra.Command{
		Use:   "add DIR NAME",
		Short: "Add a person and print their token (shown once)",
		Long: `add adds a person who may sign in to ` + "`loop serve`" + ` and prints their token.
The token is shown only now: the project keeps an argon2id hash of it, never
the token. NAME is also the annotator id their labels carry (letters, digits,
'.', '_', '@', '-'). With --admin the person may also use the board and the
team's API routes (add items, import labels, run rounds, export, manage
people). It works while ` + "`loop serve`" + ` runs.`,
		Example: `  loop people add proj alice --admin
  loop people add proj coder07`,
		Args: cobra.ExactArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			tok, err := api.AddPerson(s, args[1], admin, source(cmd))
			if err != nil {
				return err
			}
			outf(cmd, "%s\n", tok)
			infof(cmd, "added %s; the line above is their token, shown only this once\n", args[1])
			return nil
		},
	}
	c.Flags().BoolVar(&admin, "admin", false, "the person may use the board and the team's routes")
	return c
}

func newPeopleTokenCmd() *cobra.Command {
	return &cobra.Command{
		Use:     "token DIR NAME",
		Short:   "Issue another token for a person (shown once)",
		Example: "  loop people token proj coder07",
		Args:    cobra.ExactArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			tok, err := api.NewToken(s, args[1], source(cmd))
			if err != nil {
				return err
			}
			outf(cmd, "%s\n", tok)
			return nil
		},
	}
}

func newPeopleRevokeCmd() *cobra.Command {
	var person string
	c := &cobra.Command{
		Use:   "revoke DIR TOKEN | revoke DIR --person NAME",
		Short: "Revoke a token (whole or the part before the dot), or every token of a person",
		Long: `revoke deletes a token: give it whole or just its id, the part before the dot
(` + "`loop people list`" + ` shows each person's token ids). With --person it deletes every
token of that person; they stay in the project, with their labels, and can
sign in again only with a new token (` + "`loop people token`" + `).

It works while ` + "`loop serve`" + ` runs: the server refuses the token from the next
request on and ends the page sessions opened with it.`,
		Example: `  loop people revoke proj 3f2a9c0d1e4b5a67
  loop people revoke proj --person coder07`,
		Args: func(cmd *cobra.Command, args []string) error {
			if person != "" {
				return cobra.ExactArgs(1)(cmd, args)
			}
			if len(args) != 2 {
				return usageErrorf("revoke needs DIR and a TOKEN (or DIR --person NAME)")
			}
			return nil
		},
		RunE: func(cmd *cobra.Command, args []string) error {
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			if person != "" {
				n, err := api.RevokePerson(s, person, source(cmd))
				if err != nil {
					return err
				}
				outf(cmd, "revoked %d token(s) of %s\n", n, person)
				return nil
			}
			who, err := api.RevokeToken(s, args[1], source(cmd))
			if err != nil {
				return err
			}
			outf(cmd, "revoked a token of %s\n", who)
			return nil
		},
	}
	c.Flags().StringVar(&person, "person", "", "revoke every token of this person")
	return c
}

func newPeopleListCmd() *cobra.Command {
	var asJSON bool
	c := &cobra.Command{
		Use:   "list DIR",
		Short: "List the people of a project with their role, check and token ids",
		Long: `list prints one line per person: id, role (admin or annotator), where they stand
in the practice and the check that come before real work, the ids of their
tokens (never the tokens: only their hashes are kept), and when they were
added. --json prints the same as JSON.`,
		Example: "  loop people list proj\n  loop people list proj --json",
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			rows, err := api.Roster(s)
			if err != nil {
				return err
			}
			return show(cmd, asJSON, rows, api.RosterText(rows))
		},
	}
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON")
	return c
}

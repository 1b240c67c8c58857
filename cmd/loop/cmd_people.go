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
team's API routes (add items, import labels, run rounds, export).`,
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
	return &cobra.Command{
		Use:   "revoke DIR TOKEN",
		Short: "Revoke a token (give it whole or just the part before the dot)",
		Long: `revoke deletes a token. A server that is running keeps accepting a
token it verified in the last few minutes until its memory of it expires
(5 minutes); restart it to end that at once.`,
		Example: "  loop people revoke proj 3f2a9c0d1e4b5a67",
		Args:    cobra.ExactArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			return api.RevokeToken(s, args[1], source(cmd))
		},
	}
}

func newPeopleListCmd() *cobra.Command {
	var asJSON bool
	c := &cobra.Command{
		Use:     "list DIR",
		Short:   "List the people of a project",
		Example: "  loop people list proj --json",
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			people, err := api.People(s)
			if err != nil {
				return err
			}
			if asJSON {
				if people == nil {
					people = []api.Person{}
				}
				return printJSON(cmd, people)
			}
			for _, p := range people {
				role := "annotator"
				if p.Admin {
					role = "admin"
				}
				quiz := "quiz not passed"
				if p.Training.Passed {
					quiz = "quiz passed"
				}
				outf(cmd, "%s\t%s\t%s\tsince %s\n", p.ID, role, quiz, p.Created.Format("2006-01-02"))
			}
			return nil
		},
	}
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON")
	return c
}

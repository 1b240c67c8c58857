package main

import (
	"github.com/spf13/cobra"

	"handoff/api"
	"handoff/internal/cli"
	"handoff/store"
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
		Use:     "add DIR NAME",
		Short:   "Add a person and print their token (shown once)",
		Long:    helpLong("people-add"),
		Example: helpExample("people-add"),
		Args:    cobra.ExactArgs(2),
		RunE: withStore(func(cmd *cobra.Command, s *store.Store, args []string) error {
			tok, err := api.AddPerson(s, args[1], admin, cli.Source(cmd))
			if err != nil {
				return err
			}
			cli.Out(cmd, "%s\n", tok)
			cli.Info(cmd, "added %s; the line above is their token, shown only this once\n", args[1])
			return nil
		}),
	}
	c.Flags().BoolVar(&admin, "admin", false, "the person may use the board and the team's routes")
	return c
}

func newPeopleTokenCmd() *cobra.Command {
	return &cobra.Command{
		Use:     "token DIR NAME",
		Short:   "Issue another token for a person (shown once)",
		Example: helpExample("people-token"),
		Args:    cobra.ExactArgs(2),
		RunE: withStore(func(cmd *cobra.Command, s *store.Store, args []string) error {
			tok, err := api.NewToken(s, args[1], cli.Source(cmd))
			if err != nil {
				return err
			}
			cli.Out(cmd, "%s\n", tok)
			return nil
		}),
	}
}

func newPeopleRevokeCmd() *cobra.Command {
	var person string
	c := &cobra.Command{
		Use:     "revoke DIR TOKEN | revoke DIR --person NAME",
		Short:   "Revoke a token (whole or the part before the dot), or every token of a person",
		Long:    helpLong("people-revoke"),
		Example: helpExample("people-revoke"),
		Args: func(cmd *cobra.Command, args []string) error {
			if person != "" {
				return cobra.ExactArgs(1)(cmd, args)
			}
			if len(args) != 2 {
				return cli.Usagef("revoke needs DIR and a TOKEN (or DIR --person NAME)")
			}
			return nil
		},
		RunE: withStore(func(cmd *cobra.Command, s *store.Store, args []string) error {
			if person != "" {
				n, err := api.RevokePerson(s, person, cli.Source(cmd))
				if err != nil {
					return err
				}
				cli.Out(cmd, "revoked %d token(s) of %s\n", n, person)
				return nil
			}
			who, err := api.RevokeToken(s, args[1], cli.Source(cmd))
			if err != nil {
				return err
			}
			cli.Out(cmd, "revoked a token of %s\n", who)
			return nil
		}),
	}
	c.Flags().StringVar(&person, "person", "", "revoke every token of this person")
	return c
}

func newPeopleListCmd() *cobra.Command {
	var asJSON bool
	c := &cobra.Command{
		Use:     "list DIR",
		Short:   "List the people of a project with their role, check and token ids",
		Long:    helpLong("people-list"),
		Example: helpExample("people-list"),
		Args:    cobra.ExactArgs(1),
		RunE: withStore(func(cmd *cobra.Command, s *store.Store, args []string) error {
			rows, err := api.Roster(s)
			if err != nil {
				return err
			}
			return cli.Show(cmd, asJSON, rows, api.RosterText(rows))
		}),
	}
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON")
	return c
}

package main

import (
	"context"
	"fmt"

	"plumb/cmd/plumb/internal/access"
)

func init() {
	register(command{name: "user", summary: "make a bearer token for a named user (plumb user token NAME)", run: runUser})
}

func runUser(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "user", "token NAME [--role viewer|operator|reviewer]",
		"User token makes a new random bearer token (256 bits) for a named user and prints the\n"+
			"token, once, and the [[user]] table to add to the configuration, which holds only the\n"+
			"token's SHA-256. Give the token to the user; plumb cannot show it again.")
	role := fs.String("role", "viewer", "the user's role: viewer, operator or reviewer")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 2 || pos[0] != "token" {
		fs.Usage()
		return fmt.Errorf("user: %w: want \"plumb user token NAME\"", errUsage)
	}
	if r, err := access.ParseRole(*role); err != nil || r == access.NoRole {
		return fmt.Errorf("user: %w: --role wants viewer, operator or reviewer, got %q", errUsage, *role)
	}
	tok, hash, err := access.NewToken()
	if err != nil {
		return err
	}
	fmt.Fprintf(e.stderr, "token for %s (give it to them; it is not stored):\n", pos[1])
	fmt.Fprintln(e.stdout, tok)
	fmt.Fprintf(e.stderr, "\nadd to the configuration:\n\n[[user]]\nname = %q\nrole = %q\ntoken_sha256 = %q\n", pos[1], *role, hash)
	return nil
}

package main

import (
	"context"
	"fmt"
	"io"

	"strayleaf/api/auth"
)

func init() {
	register(&command{name: "token", summary: "make a bearer token for strayleafd and its tokens-file line", run: runToken})
}

// runToken: `strayleaf token new --name N --role R` prints a fresh token on the first line and
// the line for strayleafd's tokens file (NAME ROLE SHA256-HEX) on the second.
func runToken(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	if len(args) == 0 || args[0] != "new" {
		fmt.Fprintln(stderr, "Usage: strayleaf token new --name NAME --role place|publish|admin")
		if len(args) == 0 {
			return exitError{2}
		}
		return usageError("token", "unknown subcommand %q; expected new", args[0])
	}
	fs := newFlags("token new", "token new --name NAME --role place|publish|admin", stderr)
	name := fs.String("name", "", "who holds the token (shown in the server's log and the store's history)")
	roleName := fs.String("role", "", "place (read models, place, suggest), publish (also publish and set aliases) or admin (also delete and export)")
	if err := parseFlags(fs, args[1:]); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usageError("token new", "unexpected arguments %q", fs.Args())
	}
	if *name == "" {
		return usageError("token new", "--name is required")
	}
	role, err := auth.ParseRole(*roleName)
	if err != nil {
		return usageError("token new", "--role: %v", err)
	}
	tok, err := auth.NewToken()
	if err != nil {
		return err
	}
	line, err := auth.Line(*name, role, tok)
	if err != nil {
		return usageError("token new", "%v", err)
	}
	fmt.Fprintln(stdout, tok)
	fmt.Fprintln(stdout, line)
	fmt.Fprintln(stderr, "The first line is the token: hand it to its holder and keep it secret; it is not shown again.")
	fmt.Fprintln(stderr, "The second line goes into strayleafd's tokens file; then send the daemon SIGHUP to reread it.")
	return nil
}

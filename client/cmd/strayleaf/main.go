// Command strayleaf trains group models from a collation, keeps them in a model store and places
// new witnesses and fragments against them, locally or through a strayleafd server.
//
// Run `strayleaf help` for the commands and `strayleaf COMMAND --help` for each one's flags.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"sort"
	"syscall"
)

// command is one subcommand of the CLI. Each lives in its own cmd_*.go file and registers itself
// from init.
type command struct {
	name, summary string
	run           func(ctx context.Context, args []string, stdout, stderr io.Writer) error
}

var commands = map[string]*command{}

func register(c *command) {
	if _, dup := commands[c.name]; dup {
		panic("strayleaf: command registered twice: " + c.name)
	}
	commands[c.name] = c
}

// exitError carries a specific exit status; other errors exit with 1.
type exitError struct{ code int }

func (e exitError) Error() string { return fmt.Sprintf("exit status %d", e.code) }

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// run executes the command line args and returns the exit status.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 || args[0] == "help" || args[0] == "-h" || args[0] == "--help" {
		usage(stdout)
		if len(args) == 0 {
			return 2
		}
		return 0
	}
	c, ok := commands[args[0]]
	if !ok {
		fmt.Fprintf(stderr, "strayleaf: unknown command %q\n\n", args[0])
		usage(stderr)
		return 2
	}
	err := c.run(ctx, args[1:], stdout, stderr)
	switch {
	case err == nil:
		return 0
	case errors.Is(err, flag.ErrHelp):
		return 0
	}
	var ee exitError
	if errors.As(err, &ee) {
		return ee.code
	}
	var ue *usageErr
	if errors.As(err, &ue) {
		// The usage error names the (sub)command itself, unless it leaves that to us.
		if ue.where == "" {
			fmt.Fprintf(stderr, "strayleaf %s: %v\n", c.name, err)
		} else {
			fmt.Fprintf(stderr, "strayleaf %v\n", err)
		}
		return 2
	}
	fmt.Fprintf(stderr, "strayleaf %s: %v\n", c.name, err)
	return 1
}

func usage(w io.Writer) {
	fmt.Fprintln(w, "strayleaf places manuscript witnesses and fragments into the groups of a textual tradition.")
	fmt.Fprintln(w, "\nUsage: strayleaf COMMAND [flags]\n\nCommands:")
	names := make([]string, 0, len(commands))
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-10s %s\n", n, commands[n].summary)
	}
	fmt.Fprintln(w, "\nRun 'strayleaf COMMAND --help' for a command's flags.")
}

// newFlags returns a flag set for a command that prints its usage to stderr and returns errors
// instead of exiting.
func newFlags(name, synopsis string, stderr io.Writer) *flag.FlagSet {
	fs := flag.NewFlagSet("strayleaf "+name, flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprintf(stderr, "Usage: strayleaf %s\n\n", synopsis)
		fs.PrintDefaults()
	}
	return fs
}

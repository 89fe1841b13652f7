// Command plumb watches folders of regression data as it arrives, refits
// every configured model, judges each observation's leverage and influence,
// keeps the history in SQLite and alerts the on-call person.
//
// Run "plumb help" for the list of subcommands and "plumb help COMMAND" (or
// "plumb COMMAND --help") for each one's flags.
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
	"strings"
	"syscall"
)

// command is one subcommand. Each lives in its own file and registers
// itself from an init function.
type command struct {
	name    string
	summary string
	// run executes the command. It returns errUsage (wrapped) for bad
	// arguments, which main maps to exit code 2.
	run func(ctx context.Context, env *env, args []string) error
}

// env is what a command may touch of the outside world, so that tests can
// run commands in-process.
type env struct {
	stdin  io.Reader
	stdout io.Writer
	stderr io.Writer
	getenv func(string) string
}

var commands = map[string]command{}

func register(c command) {
	if _, dup := commands[c.name]; dup {
		panic("plumb: command registered twice: " + c.name)
	}
	commands[c.name] = c
}

// errUsage marks an error in the command line; main exits 2 for it.
var errUsage = errors.New("usage")

// usageError is a command-line error in one line, pointing at the help.
// It matches errUsage.
type usageError struct{ msg string }

func (e *usageError) Error() string        { return e.msg }
func (e *usageError) Is(target error) bool { return target == errUsage }

// usageErr says what is wrong with the command line of cmd, and where to
// read how it goes: `ack: name one alert id (see "plumb ack --help")`.
func usageErr(cmd, msg string) error {
	return &usageError{fmt.Sprintf("%s: %s (see \"plumb %s --help\")", cmd, msg, cmd)}
}

// exitError carries a specific exit code (for instance 1 from "config
// check" when the file is invalid).
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string { return e.err.Error() }
func (e *exitError) Unwrap() error { return e.err }

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	e := &env{stdin: os.Stdin, stdout: os.Stdout, stderr: os.Stderr, getenv: os.Getenv}
	code := runMain(ctx, e, os.Args[1:])
	stop()
	os.Exit(code)
}

// runMain dispatches args to a subcommand and maps its error to an exit
// code: 0 success, 1 failure, 2 bad usage.
func runMain(ctx context.Context, e *env, args []string) int {
	if len(args) == 0 {
		usage(e.stderr)
		return 2
	}
	name := args[0]
	if name == "help" || name == "-h" || name == "--help" || name == "-help" {
		if len(args) > 1 {
			if c, ok := commands[args[1]]; ok {
				return exitCode(e, c.run(ctx, e, []string{"--help"}))
			}
			fmt.Fprintf(e.stderr, "plumb: unknown command %q\n", args[1])
			return 2
		}
		usage(e.stdout)
		return 0
	}
	c, ok := commands[name]
	if !ok {
		fmt.Fprintf(e.stderr, "plumb: unknown command %q (run \"plumb help\")\n", name)
		return 2
	}
	return exitCode(e, c.run(ctx, e, args[1:]))
}

func exitCode(e *env, err error) int {
	if err == nil || errors.Is(err, flag.ErrHelp) {
		return 0
	}
	var xe *exitError
	if errors.As(err, &xe) {
		if xe.err != nil && xe.err.Error() != "" {
			fmt.Fprintln(e.stderr, "plumb:", xe.err)
		}
		return xe.code
	}
	fmt.Fprintln(e.stderr, "plumb:", err)
	if errors.Is(err, errUsage) {
		return 2
	}
	return 1
}

func usage(w io.Writer) {
	names := make([]string, 0, len(commands))
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	var b strings.Builder
	b.WriteString("plumb keeps watch over regression data as it arrives.\n\nUsage: plumb COMMAND [flags]\n\nCommands:\n")
	for _, n := range names {
		fmt.Fprintf(&b, "  %-10s %s\n", n, commands[n].summary)
	}
	b.WriteString("\nRun \"plumb COMMAND --help\" for a command's flags.\n")
	io.WriteString(w, b.String())
}

// newFlags returns a flag set for a subcommand that writes its help to the
// command's stderr and reports errors instead of exiting.
func newFlags(e *env, name, synopsis, description string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	fs.Usage = func() {
		fmt.Fprintf(fs.Output(), "Usage: plumb %s %s\n\n%s\n\nFlags:\n", name, synopsis, description)
		fs.PrintDefaults()
	}
	return fs
}

// parseFlags parses args, allowing flags after positional arguments (so
// "plumb inspect data.csv --response y" works), and wraps errors as usage
// errors.
func parseFlags(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	usage, out := fs.Usage, fs.Output()
	defer func() { fs.Usage = usage; fs.SetOutput(out) }()
	for {
		// The flag package prints the error and the whole help; plumb
		// prints one line naming the problem, and the help only when
		// asked for.
		fs.Usage = func() {}
		fs.SetOutput(io.Discard)
		err := fs.Parse(args)
		fs.Usage = usage
		fs.SetOutput(out)
		if err != nil {
			if errors.Is(err, flag.ErrHelp) {
				usage()
				return nil, err
			}
			return nil, usageErr(fs.Name(), err.Error())
		}
		args = fs.Args()
		if len(args) == 0 {
			return pos, nil
		}
		if args[0] == "--" {
			return append(pos, args[1:]...), nil
		}
		pos = append(pos, args[0])
		args = args[1:]
	}
}

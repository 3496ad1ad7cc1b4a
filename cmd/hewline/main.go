// Command hewline finds a floor stripe (or a lane) in camera frames, turns
// it into a smoothed offset and heading, and drives cues, a controller
// stream and a fail-safe alarm. Run "hewline help" for the commands.
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

// version is the tool version written into logs and calibration files.
var version = "0.1.0-dev"

// command is one subcommand. Each lives in a cmd_NAME.go file of its own and
// registers itself from init.
type command struct {
	name    string
	summary string
	// run gets the arguments after the command name. Return a usageError
	// for bad flags or arguments (exit code 2); any other error exits 1.
	run func(ctx context.Context, args []string, stdout, stderr io.Writer) error
}

var commands = map[string]*command{}

func register(c *command) {
	if _, dup := commands[c.name]; dup {
		panic("hewline: command registered twice: " + c.name)
	}
	commands[c.name] = c
}

// usageError marks a mistake in the command line.
type usageError struct{ msg string }

func (e usageError) Error() string { return e.msg }

func usagef(format string, a ...any) error { return usageError{fmt.Sprintf(format, a...)} }

// newFlags makes a FlagSet that prints its usage to stderr and returns
// errors instead of exiting.
func newFlags(name, synopsis string, stderr io.Writer) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprintf(stderr, "usage: hewline %s %s\n", name, synopsis)
		if c := commands[name]; c != nil {
			fmt.Fprintf(stderr, "\n%s\n", c.summary)
		}
		fmt.Fprintln(stderr, "\noptions:")
		fs.PrintDefaults()
	}
	return fs
}

// parseFlags parses args, turning flag errors into usage errors and -h into
// errHelp.
func parseFlags(fs *flag.FlagSet, args []string) error {
	err := fs.Parse(args)
	if errors.Is(err, flag.ErrHelp) {
		return errHelp
	}
	if err != nil {
		return usageError{err.Error()}
	}
	return nil
}

var errHelp = errors.New("help shown")

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// run is main without the process: it returns the exit code.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 || args[0] == "help" || args[0] == "-h" || args[0] == "--help" {
		if len(args) > 1 {
			if c := commands[args[1]]; c != nil {
				_ = c.run(ctx, []string{"-h"}, stdout, stderr)
				return 0
			}
		}
		printHelp(stdout)
		if len(args) == 0 {
			return 2
		}
		return 0
	}
	if args[0] == "version" || args[0] == "--version" {
		fmt.Fprintln(stdout, "hewline", version)
		return 0
	}
	c := commands[args[0]]
	if c == nil {
		fmt.Fprintf(stderr, "hewline: unknown command %q (try: hewline help)\n", args[0])
		return 2
	}
	err := c.run(ctx, args[1:], stdout, stderr)
	var ue usageError
	switch {
	case err == nil || errors.Is(err, errHelp):
		return 0
	case errors.As(err, &ue):
		fmt.Fprintf(stderr, "hewline %s: %v (try: hewline %s -h)\n", c.name, err, c.name)
		return 2
	default:
		var ec exitCoder
		fmt.Fprintf(stderr, "hewline %s: %v\n", c.name, err)
		if errors.As(err, &ec) {
			return ec.ExitCode()
		}
		return 1
	}
}

// exitCoder lets an error choose its own exit code (for example 3 when the
// fail-safe alarm has no working channel left).
type exitCoder interface{ ExitCode() int }

func printHelp(w io.Writer) {
	fmt.Fprintln(w, "hewline: follow a floor stripe or lane with a camera, with cues and a fail-safe alarm.")
	fmt.Fprintln(w, "\nNot a certified safety function: see SAFETY.md before fitting it to a vehicle.")
	fmt.Fprintln(w, "\ncommands:")
	names := make([]string, 0, len(commands))
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-10s %s\n", n, commands[n].summary)
	}
	fmt.Fprintln(w, "\nRun \"hewline COMMAND -h\" for a command's options.")
}

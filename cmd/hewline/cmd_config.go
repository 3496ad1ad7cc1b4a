package main

import (
	"context"
	"errors"
	"fmt"
	"io"

	"github.com/hewline/hewline/cmd/internal/siteconfig"
)

func init() {
	register(&command{
		name:    "config",
		summary: "site configuration file: \"config check FILE\" names the line of every mistake; \"config example\" prints a documented example",
		run:     runConfig,
	})
}

const configSynopsis = "check FILE | example"

func runConfig(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("config", configSynopsis, stderr)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() == 0 {
		return usagef("give a sub-command: check FILE or example")
	}
	switch sub, rest := fs.Arg(0), fs.Args()[1:]; sub {
	case "check":
		return runConfigCheck(rest, stdout, stderr)
	case "example":
		efs := newFlags("config", "example", stderr)
		if err := parseFlags(efs, rest); err != nil {
			return err
		}
		if efs.NArg() > 0 {
			return usagef("config example takes no arguments (got %q)", efs.Args())
		}
		_, err := io.WriteString(stdout, siteconfig.ExampleYAML)
		return err
	default:
		return usagef("unknown sub-command %q (want check or example)", sub)
	}
}

// runConfigCheck loads a site file and prints its effective settings and
// the safety caution, or one line per mistake.
func runConfigCheck(args []string, stdout, stderr io.Writer) error {
	fs := newFlags("config", "check FILE", stderr)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() != 1 {
		return usagef("config check takes one site FILE (got %d arguments)", fs.NArg())
	}
	path := fs.Arg(0)
	site, err := siteconfig.Load(path)
	var list siteconfig.Errors
	if errors.As(err, &list) {
		for _, p := range list {
			fmt.Fprintln(stderr, p.Error())
		}
		n := "mistake"
		if len(list) > 1 {
			n = "mistakes"
		}
		return fmt.Errorf("%s: %d %s (fix the lines above and check again)", path, len(list), n)
	}
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "%s: valid. Effective settings (defaults < file < flags):\n\n", path)
	if err := site.WriteSummary(stdout); err != nil {
		return err
	}
	if w := site.Warnings(); len(w) > 0 {
		fmt.Fprintln(stdout)
		for _, line := range w {
			fmt.Fprintln(stdout, "WARNING:", line)
		}
	}
	fmt.Fprintln(stdout)
	fmt.Fprintln(stdout, safetyShort)
	return nil
}

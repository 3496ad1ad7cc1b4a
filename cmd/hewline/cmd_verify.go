package main

import (
	"context"
	"fmt"
	"io"
	"os"

	"github.com/hewline/hewline/guidance/tracklog"
)

func init() {
	register(&command{
		name:    "verify",
		summary: "check that track logs are complete and unaltered (every line's SHA-256 chain)",
		run:     runVerify,
	})
}

func runVerify(_ context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("verify", "LOG...", stderr)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() == 0 {
		return usagef("no log given")
	}
	if fs.NArg() == 1 {
		msg, err := verifyOne(fs.Arg(0))
		if err != nil {
			return err
		}
		fmt.Fprintln(stdout, msg)
		return nil
	}
	bad := 0
	for _, p := range fs.Args() {
		msg, err := verifyOne(p)
		if err != nil {
			fmt.Fprintf(stdout, "FAILED: %v\n", err)
			bad++
			continue
		}
		fmt.Fprintln(stdout, msg)
	}
	if bad > 0 {
		return fmt.Errorf("%d of %d logs failed verification", bad, fs.NArg())
	}
	return nil
}

// verifyOne checks one log and says what it found.
func verifyOne(p string) (string, error) {
	f, err := os.Open(p)
	if err != nil {
		return "", err
	}
	l, err := tracklog.Read(f)
	f.Close()
	switch {
	case err != nil:
		return "", fmt.Errorf("%s: %w", p, err)
	case l.Summary == nil:
		return "", fmt.Errorf("%s: %d frames verified but no summary line: the run ended without closing the log", p, len(l.Records))
	}
	return fmt.Sprintf("%s: ok, %d frames, chain intact, ended %q", p, len(l.Records), l.Summary.End), nil
}

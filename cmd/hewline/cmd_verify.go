package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"strings"

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
	// Rotated logs are checked as sets: each file continues the one
	// before, so a missing, extra or reordered part is found too.
	groups := tracklog.GroupSets(fs.Args())
	if len(groups) == 1 {
		msg, err := verifyGroup(groups[0])
		if err != nil {
			return err
		}
		fmt.Fprintln(stdout, msg)
		return nil
	}
	bad := 0
	for _, g := range groups {
		msg, err := verifyGroup(g)
		if err != nil {
			fmt.Fprintf(stdout, "FAILED: %v\n", err)
			bad++
			continue
		}
		fmt.Fprintln(stdout, msg)
	}
	if bad > 0 {
		return fmt.Errorf("%d of %d logs failed verification", bad, len(groups))
	}
	return nil
}

// verifyGroup checks one log (one file, or the files of a rotated log)
// and says what it found.
func verifyGroup(files []string) (string, error) {
	p := strings.Join(files, " + ")
	if len(files) == 1 {
		if _, err := os.Stat(files[0]); err != nil {
			return "", err
		}
	}
	l, err := tracklog.ReadSet(files)
	switch {
	case err != nil && len(files) == 1 && !strings.Contains(err.Error(), files[0]):
		return "", fmt.Errorf("%s: %w", p, err)
	case err != nil:
		return "", err
	case err != nil:
		return "", fmt.Errorf("%s: %w", p, err)
	case l.Summary == nil:
		return "", fmt.Errorf("%s: %d frames verified but no summary line: the run ended without closing the log", p, len(l.Records))
	}
	return fmt.Sprintf("%s: ok, %d frames, chain intact, ended %q", p, len(l.Records), l.Summary.End), nil
}

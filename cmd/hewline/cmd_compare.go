package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"sort"

	"github.com/hewline/hewline/guidance/report"
	"github.com/hewline/hewline/guidance/tracklog"
)

func init() {
	register(&command{
		name: "compare",
		summary: "show where two track logs of the same clip disagree (tracking, alarm, state, offset); " +
			"exit 0 when they agree within the tolerance, 1 when they disagree or cannot be compared",
		run: runCompare,
	})
}

func runCompare(_ context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("compare", "[-tol PX] [-max-runs N] A.ndjson B.ndjson", stderr)
	tol := fs.Float64("tol", 10, "offset tolerance in `px` for a 640-pixel-wide frame, scaled to the logs' width")
	maxRuns := fs.Int("max-runs", 50, "print at most `N` runs of disagreeing frames (0: all)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() != 2 {
		return usagef("need exactly two logs, got %d", fs.NArg())
	}
	if *tol < 0 || *maxRuns < 0 {
		return usagef("-tol and -max-runs must not be negative")
	}
	var logs [2]*tracklog.Log
	for i, p := range fs.Args() {
		f, err := os.Open(p)
		if err != nil {
			return err
		}
		l, err := tracklog.Read(f)
		f.Close()
		if err != nil {
			return fmt.Errorf("%s: %w", p, err)
		}
		logs[i] = l
	}
	a, b := fs.Arg(0), fs.Arg(1)
	tolPx := report.ToleranceFor(*tol, logs[0].Header.Width)
	d, err := report.Compare(logs[0], logs[1], tolPx)
	if err != nil {
		return fmt.Errorf("%s vs %s: %w", a, b, err)
	}
	if d.Disagree == 0 {
		fmt.Fprintf(stdout, "%s and %s agree on all %d frames (offset within %.1f px; largest difference %.1f px)\n",
			a, b, d.Frames, tolPx, d.MaxOffsetPx)
		return nil
	}
	fmt.Fprintf(stdout, "%s vs %s: %d of %d frames disagree, in %d run(s) (offset tolerance %.1f px)\n",
		a, b, d.Disagree, d.Frames, len(d.Runs), tolPx)
	kinds := make([]string, 0, len(d.KindFrames))
	for k := range d.KindFrames {
		kinds = append(kinds, k)
	}
	sort.Strings(kinds)
	for _, k := range kinds {
		fmt.Fprintf(stdout, "  %-9s %d frames\n", k, d.KindFrames[k])
	}
	for i, r := range d.Runs {
		if *maxRuns > 0 && i == *maxRuns {
			fmt.Fprintf(stdout, "  … %d more run(s) (see -max-runs)\n", len(d.Runs)-i)
			break
		}
		fmt.Fprintf(stdout, "  %s\n", r)
	}
	return fmt.Errorf("%s and %s disagree on %d of %d frames", a, b, d.Disagree, d.Frames)
}

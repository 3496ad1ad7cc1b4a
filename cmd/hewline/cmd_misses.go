package main

import (
	"context"
	"fmt"
	"io"

	"github.com/hewline/hewline/guidance/score"
)

func init() {
	register(&command{
		name: "misses",
		summary: "show the runs of frames a track log loses against its clip's truth (missed, off, false track), " +
			"with the tracker's states and reasons, to find where a replay goes wrong",
		run: runMisses,
	})
}

func runMisses(_ context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("misses", "[-max-runs N] TRACK.ndjson TRUTH.ndjson", stderr)
	maxRuns := fs.Int("max-runs", 50, "print at most `N` runs (0: all)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() != 2 {
		return usagef("need a track log and a truth file, got %d arguments", fs.NArg())
	}
	if *maxRuns < 0 {
		return usagef("-max-runs must not be negative")
	}
	logPath, truthPath := fs.Arg(0), fs.Arg(1)
	h, frames, l, err := readLogAndTruth(logPath, truthPath)
	if err != nil {
		return err
	}
	scores, err := score.Frames(h, frames, l.Records)
	if err != nil {
		return fmt.Errorf("%s against %s: %w", logPath, truthPath, err)
	}
	counts := map[score.Verdict]int{}
	for _, f := range scores {
		counts[f.Verdict]++
	}
	runs := score.Runs(scores)
	lost := counts[score.Missed] + counts[score.Off] + counts[score.False]
	fmt.Fprintf(stdout, "%s: %d frames; right %d, missed %d, off %d, false track %d; %d counted frames in %d run(s)\n",
		logPath, len(scores), counts[score.Right], counts[score.Missed], counts[score.Off], counts[score.False], lost, len(runs))
	for i, r := range runs {
		if *maxRuns > 0 && i == *maxRuns {
			fmt.Fprintf(stdout, "  … %d more run(s) (see -max-runs)\n", len(runs)-i)
			break
		}
		fmt.Fprintf(stdout, "  %s\n", r)
	}
	return nil
}

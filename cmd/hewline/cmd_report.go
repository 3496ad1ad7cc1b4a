package main

import (
	"context"
	"fmt"
	"io"
	"time"

	"github.com/hewline/hewline/guidance/report"
	"github.com/hewline/hewline/guidance/tracklog"
)

func init() {
	register(&command{
		name:    "report",
		summary: "write an HTML audit report (and PNG plots) from track logs: states, alarms, every loss of tracking, latency, settings",
		run:     runReport,
	})
}

func runReport(_ context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("report", "[-o report.html] [-allow-broken] [-no-thumbs] LOG...", stderr)
	out := fs.String("o", "report.html", "the HTML `file` to write; PNGs of each plot go beside it")
	allowBroken := fs.Bool("allow-broken", false, "report on logs that fail verification too (the report says loudly which, and from which line)")
	noThumbs := fs.Bool("no-thumbs", false, "do not read the recordings for loss thumbnails")
	title := fs.String("title", "", "the report's `title`")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() == 0 {
		return usagef("no log given")
	}
	var in []report.Input
	for _, set := range tracklog.GroupSets(fs.Args()) {
		name := set[0]
		if len(set) > 1 {
			name = fmt.Sprintf("%s (+%d rotated files)", set[0], len(set)-1)
		}
		l, err := tracklog.ReadSet(set)
		if err != nil {
			if !*allowBroken {
				return fmt.Errorf("%w (use -allow-broken to report on it anyway)", err)
			}
			fmt.Fprintf(stderr, "hewline report: WARNING: fails verification: %v\n", err)
		}
		in = append(in, report.Input{Path: name, Log: l, Broken: err})
	}
	r, err := report.Build(in, report.Options{Title: *title, Generated: time.Now(), NoThumbs: *noThumbs})
	if err != nil {
		return err
	}
	pngs, err := r.WriteFile(*out)
	if err != nil {
		return fmt.Errorf("%s: %w", *out, err)
	}
	t := r.Total
	fmt.Fprintf(stdout, "%s: %d log(s), %d frames, %.1f %% tracking, %d alarm period(s), %d loss(es) of tracking; %d PNG plots beside it\n",
		*out, len(in), t.Frames, t.TrackingPct(), len(t.Alarms), len(t.Losses), len(pngs))
	return nil
}

package main

import (
	"context"
	"fmt"
	"io"
	"os"
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
	for _, p := range fs.Args() {
		f, err := os.Open(p)
		if err != nil {
			return err
		}
		l, err := tracklog.Read(f)
		f.Close()
		if err == nil && l.Summary == nil {
			err = fmt.Errorf("%d frames verified but no summary line: the run ended without closing the log", len(l.Records))
		}
		if err != nil {
			if !*allowBroken {
				return fmt.Errorf("%s: %w (use -allow-broken to report on it anyway)", p, err)
			}
			fmt.Fprintf(stderr, "hewline report: WARNING: %s fails verification: %v\n", p, err)
		}
		in = append(in, report.Input{Path: p, Log: l, Broken: err})
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

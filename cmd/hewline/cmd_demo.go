package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"github.com/hewline/hewline/capture/synth"
	"github.com/hewline/hewline/guidance/score"
)

func init() {
	register(&command{
		name:    "demo",
		summary: "render the built-in warehouse scene, replay it and score the result against the scene's truth",
		run:     runDemo,
	})
}

func runDemo(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("demo", "[options]", stderr)
	out := fs.String("out", "hewline-demo", "output `DIR` for the clip, truth, track log, annotated video and summary")
	scen := fs.String("scenario", "weave,gap", "comma-separated built-in `SCENARIOS` to render (see -list)")
	list := fs.Bool("list", false, "list the built-in scenarios and exit")
	o := replayFlags(fs)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *list {
		for _, n := range synth.Names() {
			sc, _ := synth.Lookup(n)
			fmt.Fprintf(stdout, "%-22s %dx%d, %d frames: %s\n", n, sc.Width, sc.Height, sc.Frames, sc.Notes)
		}
		return nil
	}
	if fs.NArg() > 0 {
		return usagef("demo takes no arguments (got %q)", fs.Args())
	}
	o.progress = isTerminal(stderr)
	if err := os.MkdirAll(*out, 0o755); err != nil {
		return err
	}
	fmt.Fprintln(stdout, safetyShort)
	var results []*score.Result
	var md strings.Builder
	for _, name := range strings.Split(*scen, ",") {
		name = strings.TrimSpace(name)
		sc, err := synth.Lookup(name)
		if err != nil {
			return usagef("%v (try: hewline demo -list)", err)
		}
		clip := filepath.Join(*out, name+".avi")
		truthPath := filepath.Join(*out, name+".truth.ndjson")
		fmt.Fprintf(stdout, "rendering %s (%d frames, %dx%d) ...\n", name, sc.Frames, sc.Width, sc.Height)
		if err := synth.WriteClip(sc, clip, truthPath); err != nil {
			return fmt.Errorf("render %s: %w", name, err)
		}
		logPath := filepath.Join(*out, name+".track.ndjson")
		videoPath := filepath.Join(*out, name+".annotated.avi")
		res, err := replayClip(ctx, clip, logPath, videoPath, o, stderr)
		if err != nil {
			return err
		}
		sc2, err := scoreClip(name, logPath, truthPath)
		if err != nil {
			return err
		}
		res.score = sc2
		results = append(results, sc2)
		printSummary(stdout, res)
		fmt.Fprintf(stdout, "  annotated video: %s\n", videoPath)
	}
	all := score.Combine("overall", results)
	if len(results) > 1 {
		results = append(results, all)
	}
	md.WriteString("# hewline demo: scores against the renderer's truth\n\n")
	md.WriteString("Computed by `hewline demo` from the track logs and the truth files in this folder.\n")
	md.WriteString("Recall counts a frame correct when tracking is claimed and 85 % of the truth rows in the near half\n")
	md.WriteString("lie within 10 px at 640 px width (the TuSimple benchmark's 20 px at 1280, scaled).\n\n")
	score.WriteTable(&md, results)
	md.WriteString("\n## Reliability of the detector's confidence (all clips)\n\n")
	score.WriteReliability(&md, all)
	sumPath := filepath.Join(*out, "summary.md")
	if err := os.WriteFile(sumPath, []byte(md.String()), 0o644); err != nil {
		return err
	}
	fmt.Fprintln(stdout)
	score.WriteTable(stdout, results)
	fmt.Fprintf(stdout, "\nsummary: %s\n", sumPath)
	return nil
}

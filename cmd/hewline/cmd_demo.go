package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

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
	readme := fs.String("readme", "", "also write the score table into `FILE` between its <!-- scores:begin --> and <!-- scores:end --> lines")
	o := replayFlags(fs)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if err := o.applySite(fs); err != nil {
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
	names := strings.Split(*scen, ",")
	if *scen == "all" {
		names = synth.Names()
	}
	for _, name := range names {
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
	if *readme != "" {
		var b strings.Builder
		fmt.Fprintf(&b, "Scores of `hewline demo -scenario %s` (regenerate: `bash scripts/scores.sh`), %s, hewline %s:\n\n", *scen, time.Now().UTC().Format("2006-01-02"), version)
		score.WriteTable(&b, results)
		b.WriteString("\nReliability of the detector's stated confidence over these clips:\n\n")
		score.WriteReliability(&b, all)
		if err := replaceBetween(*readme, "<!-- scores:begin -->", "<!-- scores:end -->", b.String()); err != nil {
			return err
		}
		fmt.Fprintf(stdout, "score table written into %s\n", *readme)
	}
	return nil
}

// replaceBetween replaces the text between two marker lines of a file.
func replaceBetween(path, begin, end, text string) error {
	b, err := os.ReadFile(path)
	if err != nil {
		return err
	}
	s := string(b)
	i, j := strings.Index(s, begin), strings.Index(s, end)
	if i < 0 || j < i {
		return fmt.Errorf("%s: no %s ... %s markers", path, begin, end)
	}
	s = s[:i+len(begin)] + "\n" + text + s[j:]
	return os.WriteFile(path, []byte(s), 0o644)
}

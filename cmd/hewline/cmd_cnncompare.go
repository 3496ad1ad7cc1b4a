package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"github.com/hewline/hewline/capture/synth"
	"github.com/hewline/hewline/cmd/internal/pipeline"
	"github.com/hewline/hewline/guidance/report"
	"github.com/hewline/hewline/guidance/score"
)

func init() {
	register(&command{
		name: "cnn-compare",
		summary: "render built-in scenarios, replay each with and without the CNN fallback and " +
			"print recall and false-track frames side by side",
		run: runCNNCompare,
	})
}

// fallbackRow is one scenario replayed both ways.
type fallbackRow struct {
	name     string
	off, on  *score.Result
	methods  map[string]int // method_frames of the run with the fallback
	cnnGated float64        // fallback measurements dropped by the gate
}

func runCNNCompare(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("cnn-compare", "[options]", stderr)
	out := fs.String("out", "hewline-cnn-compare", "output `DIR` for clips, truth files and the two track logs per scenario")
	scen := fs.String("scenario", "all", "comma-separated built-in `SCENARIOS` (see hewline demo -list), or all (every stripe scene: the fallback reads one stripe, not a lane)")
	reuse := fs.Bool("reuse", false, "reuse clips and truth files already in -out instead of rendering them again")
	jobs := fs.Int("jobs", 0, "scenarios processed at once (0 = one per core)")
	readme := fs.String("readme", "", "also write the table into `FILE` between its <!-- cnn:begin --> and <!-- cnn:end --> lines")
	size := fs.String("size", "", "render every scene at this frame `SIZE` (WxH, e.g. 320x240) instead of its own (640x480)")
	o := replayFlags(fs)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if err := o.applySite(fs); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usagef("cnn-compare takes no arguments (got %q)", fs.Args())
	}
	names := strings.Split(*scen, ",")
	if *scen == "all" {
		names = names[:0]
		for _, n := range synth.Names() {
			if sc, err := synth.Lookup(n); err == nil && sc.Follow != synth.FollowLane {
				names = append(names, n)
			}
		}
	}
	for i, n := range names {
		names[i] = strings.TrimSpace(n)
		if _, err := synth.Lookup(names[i]); err != nil {
			return usagef("%v (try: hewline demo -list)", err)
		}
	}
	var w, h int
	if *size != "" {
		sz, err := parseSizes(*size)
		if err != nil || len(sz) != 1 {
			return usagef("-size %q: want one WxH", *size)
		}
		w, h = sz[0][0], sz[0][1]
	}
	if err := os.MkdirAll(*out, 0o755); err != nil {
		return err
	}
	off, on := *o, *o
	off.cnn, on.cnn = false, true
	rows, errs := report.ParallelMap(ctx, names, *jobs, func(ctx context.Context, name string) (*fallbackRow, error) {
		sc, _ := synth.Lookup(name)
		stem := name
		if w > 0 {
			sc = sc.Resized(w, h)
			stem = fmt.Sprintf("%s@%dx%d", name, w, h)
		}
		clip := filepath.Join(*out, stem+".avi")
		truthPath := filepath.Join(*out, stem+".truth.ndjson")
		if !*reuse || !exists(clip) || !exists(truthPath) {
			if err := synth.WriteClip(sc, clip, truthPath); err != nil {
				return nil, fmt.Errorf("render %s: %w", name, err)
			}
		}
		row := &fallbackRow{name: name}
		for _, run := range []struct {
			o    *replayOptions
			tag  string
			dest **score.Result
		}{{&off, "classical", &row.off}, {&on, "fallback", &row.on}} {
			logPath := filepath.Join(*out, stem+"."+run.tag+".track.ndjson")
			res, err := replayClip(ctx, clip, logPath, "", run.o, io.Discard)
			if err != nil {
				return nil, fmt.Errorf("%s (%s): %w", name, run.tag, err)
			}
			if *run.dest, err = scoreClip(name, logPath, truthPath); err != nil {
				return nil, err
			}
			if run.o.cnn {
				row.methods = res.sum.MethodFrames
				row.cnnGated = res.sum.Extra["cnn_gated"]
			}
		}
		return row, nil
	})
	var results []*fallbackRow
	for i, err := range errs {
		if err != nil {
			return err
		}
		results = append(results, rows[i])
	}
	var b strings.Builder
	writeFallbackTable(&b, results)
	fmt.Fprint(stdout, b.String())
	if *readme != "" {
		sizeArg := ""
		if *size != "" {
			sizeArg = " -size " + *size
		}
		text := fmt.Sprintf("Regenerate: `hewline cnn-compare -scenario %s%s -readme README.md` (model: %s).\n\n%s", *scen, sizeArg, modelName(&on), b.String())
		if err := replaceBetween(*readme, "<!-- cnn:begin -->", "<!-- cnn:end -->", text); err != nil {
			return err
		}
		fmt.Fprintf(stdout, "table written into %s\n", *readme)
	}
	return nil
}

func exists(p string) bool {
	_, err := os.Stat(p)
	return err == nil
}

// writeFallbackTable writes one Markdown row per scenario and an overall
// row: recall and false-track frames without and with the fallback, and
// how the fallback's frames were logged.
func writeFallbackTable(w io.Writer, rows []*fallbackRow) {
	fmt.Fprintln(w, "| scenario | visible | recall classical | recall with CNN | false tracks classical | false tracks with CNN | max alarm latency s, classical / with CNN | frames cnn / fused / disputed | CNN gated out |")
	fmt.Fprintln(w, "|---|---:|---:|---:|---:|---:|---:|---:|---:|")
	var offs, ons []*score.Result
	tot := map[string]int{}
	var gated float64
	line := func(name string, off, on *score.Result, m map[string]int, g float64) {
		cnnF, fused, disp := m["cnn"], m[pipeline.MethodFused], 0
		for k, v := range m {
			if strings.HasPrefix(k, pipeline.MethodDisputed) {
				disp += v
			}
		}
		fmt.Fprintf(w, "| %s | %d | %.3f | %.3f%s | %d | %d%s | %s / %s | %d / %d / %d | %.0f |\n", name, off.VisibleFrames,
			off.Recall(), on.Recall(), mark(on.Recall()-off.Recall(), 0.0005), off.FalseTracks, on.FalseTracks,
			mark(float64(off.FalseTracks-on.FalseTracks), 0.5), maxLatency(off), maxLatency(on), cnnF, fused, disp, g)
	}
	for _, r := range rows {
		line(r.name, r.off, r.on, r.methods, r.cnnGated)
		offs, ons = append(offs, r.off), append(ons, r.on)
		for k, v := range r.methods {
			tot[k] += v
		}
		gated += r.cnnGated
	}
	if len(rows) > 1 {
		line("**overall**", score.Combine("overall", offs), score.Combine("overall", ons), tot, gated)
	}
}

// maxLatency is the longest alarm latency, "missed" when an alarm was
// missed, "–" when the line was never lost.
func maxLatency(r *score.Result) string {
	l := r.MaxLatency()
	switch {
	case math.IsInf(l, 1):
		return "missed"
	case math.IsNaN(l):
		return "–"
	}
	return fmt.Sprintf("%.3f", l)
}

// mark flags a change: " ▲" better, " ▼" worse (d > 0 is better).
func mark(d, eps float64) string {
	switch {
	case math.Abs(d) < eps:
		return ""
	case d > 0:
		return " ▲"
	}
	return " ▼"
}

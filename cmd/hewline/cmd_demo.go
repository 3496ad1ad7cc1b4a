package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"sort"
	"strconv"
	"strings"
	"syscall"
	"time"

	"github.com/hewline/hewline/capture/synth"
	"github.com/hewline/hewline/guidance/report"
	"github.com/hewline/hewline/guidance/score"
)

func init() {
	register(&command{
		name:    "demo",
		summary: "render the built-in warehouse scenes, replay them and score the result against the scenes' truth",
		run:     runDemo,
	})
}

// demoJob is one scene at one size.
type demoJob struct {
	scene string
	w, h  int // 0: the scene's own size
}

// base is the job's file name stem: the scene, with @WxH when resized.
func (j demoJob) base() string {
	if j.w == 0 {
		return j.scene
	}
	return fmt.Sprintf("%s@%dx%d", j.scene, j.w, j.h)
}

// demoOutcome is what one job produced.
type demoOutcome struct {
	job            demoJob
	w, h           int
	follow         string
	tags           []string // the scene's (synth.Scenario.Tags)
	res            *clipResult
	plain          *score.Result // the reference follower's score (-baseline)
	render, replay time.Duration
}

func runDemo(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("demo", "[options]", stderr)
	out := fs.String("out", "hewline-demo", "output `DIR` for the clips, truth, track logs, annotated videos and summary")
	scen := fs.String("scenario", "weave,gap", "comma-separated built-in `SCENES` to render, each NAME or NAME@WxH; all = every scene (all@WxH too; see -list)")
	size := fs.String("size", "", "comma-separated frame `SIZES` (WxH, e.g. 160x120,320x240,640x480,1280x720) for every scene given without @WxH (default: each scene's own, 640x480)")
	jobs := fs.Int("jobs", 0, "scenes rendered and replayed at once (0 = one per core)")
	baseline := fs.Bool("baseline", false, "also replay every stripe scene with the plain reference follower (package reffollow) and add its overall rows")
	list := fs.Bool("list", false, "list the built-in scenes and exit")
	readme := fs.String("readme", "", "also write the score tables into `FILE` between its <!-- scores:begin --> and <!-- scores:end --> lines")
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
			fmt.Fprintf(stdout, "%-22s %-6s %dx%d, %d frames: %s\n", n, followOf(sc), sc.Width, sc.Height, sc.Frames, sc.Notes)
		}
		return nil
	}
	if fs.NArg() > 0 {
		return usagef("demo takes no arguments (got %q)", fs.Args())
	}
	sizes, err := parseSizes(*size)
	if err != nil {
		return usagef("-size: %v", err)
	}
	todo, err := demoJobs(*scen, sizes)
	if err != nil {
		return usagef("%v (try: hewline demo -list)", err)
	}
	if err := os.MkdirAll(*out, 0o755); err != nil {
		return err
	}
	workers := *jobs
	if workers <= 0 {
		workers = runtime.NumCPU()
	}
	workers = min(workers, len(todo))
	o.progress = isTerminal(stderr) && workers == 1
	fmt.Fprintln(stdout, safetyShort)
	fmt.Fprintf(stdout, "%d clips, %d at a time\n", len(todo), workers)
	start, cpu0 := time.Now(), cpuTime()
	outs, errs := report.ParallelMap(ctx, todo, workers, func(ctx context.Context, j demoJob) (*demoOutcome, error) {
		return runDemoJob(ctx, j, *out, *o, *baseline, stderr)
	})
	var done []*demoOutcome
	var failed []string
	for i, oc := range outs {
		if errs[i] != nil {
			if errors.Is(errs[i], context.Canceled) {
				return errs[i]
			}
			fmt.Fprintf(stderr, "hewline demo: %s: %v\n", todo[i].base(), errs[i])
			failed = append(failed, todo[i].base())
			continue
		}
		printSummary(stdout, oc.res)
		fmt.Fprintf(stdout, "  rendered in %.1f s, replayed in %.1f s; annotated video: %s\n", oc.render.Seconds(), oc.replay.Seconds(),
			filepath.Join(*out, oc.job.base()+".annotated.avi"))
		done = append(done, oc)
	}
	took, cpu := time.Since(start), cpuTime()-cpu0
	if len(done) == 0 {
		return fmt.Errorf("no clip could be scored: %s", strings.Join(failed, ", "))
	}

	tables := demoTables(done)
	var md strings.Builder
	md.WriteString("# hewline demo: scores against the renderer's truth\n\n")
	md.WriteString("Computed by `hewline demo` from the track logs and the truth files in this folder.\n")
	md.WriteString(scoreRule)
	md.WriteString(tables)
	sumPath := filepath.Join(*out, "summary.md")
	if err := os.WriteFile(sumPath, []byte(md.String()), 0o644); err != nil {
		return err
	}
	fmt.Fprintln(stdout)
	io.WriteString(stdout, tables)
	fmt.Fprintf(stdout, "\n%d clips in %.0f s (%.0f s of CPU) with %d at a time; summary: %s\n", len(done), took.Seconds(), cpu.Seconds(), workers, sumPath)
	if *readme != "" {
		var b strings.Builder
		fmt.Fprintf(&b, "Scores of `hewline demo` (regenerate: `bash scripts/scores.sh`), %s, hewline %s, %d clips in %.0f min (%.0f min of CPU) on %d cores.\n",
			time.Now().UTC().Format("2006-01-02"), version, len(done), took.Minutes(), cpu.Minutes(), runtime.NumCPU())
		b.WriteString(scoreRule)
		b.WriteString(tables)
		if err := replaceBetween(*readme, "<!-- scores:begin -->", "<!-- scores:end -->", b.String()); err != nil {
			return err
		}
		fmt.Fprintf(stdout, "score tables written into %s\n", *readme)
	}
	if len(failed) > 0 {
		return fmt.Errorf("%d of %d clips failed: %s", len(failed), len(todo), strings.Join(failed, ", "))
	}
	return nil
}

const scoreRule = "Recall counts a frame correct when tracking is claimed and 85 % of the truth rows in the near half\n" +
	"lie within 10 px at 640 px width, scaled with the width (the TuSimple benchmark's 20 px at 1280).\n" +
	"A false track is a frame tracked where no line is visible or off by more than 30 px at 640.\n\n"

// runDemoJob renders one scene, replays it (and with -baseline replays it
// again with the reference follower) and scores both against its truth.
// o is a copy: the follow mode is the scene's own.
func runDemoJob(ctx context.Context, j demoJob, dir string, o replayOptions, baseline bool, stderr io.Writer) (*demoOutcome, error) {
	sc, err := synth.Lookup(j.scene)
	if err != nil {
		return nil, err
	}
	if j.w > 0 {
		sc = sc.Resized(j.w, j.h)
	}
	oc := &demoOutcome{job: j, w: sc.Width, h: sc.Height, follow: followOf(sc), tags: sc.Tags}
	o.follow = oc.follow
	base := filepath.Join(dir, j.base())
	clip, truthPath := base+".avi", base+".truth.ndjson"
	t0 := time.Now()
	if err := synth.WriteClip(sc, clip, truthPath); err != nil {
		return nil, fmt.Errorf("render: %w", err)
	}
	t1 := time.Now()
	oc.render = t1.Sub(t0)
	logPath := base + ".track.ndjson"
	res, err := replayClip(ctx, clip, logPath, base+".annotated.avi", &o, stderr)
	if err != nil {
		return nil, err
	}
	if res.score, err = scoreClip(j.base(), logPath, truthPath); err != nil {
		return nil, err
	}
	res.score.Name = j.scene
	oc.res = res
	oc.replay = time.Since(t1)
	if baseline && oc.follow == synth.FollowStripe {
		o.baseline, o.baselineDark = true, darkStripe(sc)
		o.progress = false
		plainLog := base + ".plain.track.ndjson"
		if _, err := replayClip(ctx, clip, plainLog, "", &o, stderr); err != nil {
			return nil, fmt.Errorf("reference follower: %w", err)
		}
		if oc.plain, err = scoreClip(j.base(), plainLog, truthPath); err != nil {
			return nil, err
		}
	}
	return oc, nil
}

// cpuTime is the CPU time this process has used so far (user + system;
// 0 where the platform does not say).
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// followOf is a scene's follow mode.
func followOf(sc synth.Scenario) string {
	if sc.Follow == "" {
		return synth.FollowStripe
	}
	return sc.Follow
}

// darkStripe tells the reference follower the stripe's polarity: darker
// than the floor by luminance (Rec. 601 weights).
func darkStripe(sc synth.Scenario) bool {
	lum := func(c synth.RGB) float64 { return 0.299*c.R + 0.587*c.G + 0.114*c.B }
	return lum(sc.Stripe.Colour) < lum(sc.Floor.Colour)
}

// demoJobs expands -scenario and -size into jobs, in the order given.
func demoJobs(scen string, sizes [][2]int) ([]demoJob, error) {
	var out []demoJob
	seen := map[demoJob]bool{}
	addJob := func(j demoJob) {
		if !seen[j] {
			seen[j] = true
			out = append(out, j)
		}
	}
	for _, item := range strings.Split(scen, ",") {
		item = strings.TrimSpace(item)
		if item == "" {
			continue
		}
		name, sz, hasSize := strings.Cut(item, "@")
		names := []string{name}
		if name == "all" {
			names = synth.Names()
		} else if _, err := synth.Lookup(name); err != nil {
			return nil, err
		}
		var szs [][2]int
		switch {
		case hasSize:
			s, err := parseSizes(sz)
			if err != nil || len(s) != 1 {
				return nil, fmt.Errorf("scene %q: size %q: want WxH", item, sz)
			}
			szs = s
		case len(sizes) > 0:
			szs = sizes
		default:
			szs = [][2]int{{0, 0}}
		}
		for _, n := range names {
			for _, s := range szs {
				addJob(demoJob{scene: n, w: s[0], h: s[1]})
			}
		}
	}
	if len(out) == 0 {
		return nil, errors.New("no scene given")
	}
	return out, nil
}

// parseSizes reads "WxH,WxH,...": each side 16 to 4096 px.
func parseSizes(s string) ([][2]int, error) {
	var out [][2]int
	for _, it := range strings.Split(s, ",") {
		it = strings.TrimSpace(it)
		if it == "" {
			continue
		}
		ws, hs, ok := strings.Cut(it, "x")
		w, err1 := strconv.Atoi(ws)
		h, err2 := strconv.Atoi(hs)
		if !ok || err1 != nil || err2 != nil || w < 16 || h < 16 || w > 4096 || h > 4096 {
			return nil, fmt.Errorf("%q: want WxH, 16 to 4096 px a side", it)
		}
		out = append(out, [2]int{w, h})
	}
	return out, nil
}

// demoTables writes the score tables: an overview with the overall lines
// per frame size and mode (and the reference follower's), then one table
// per frame size with stripe scenes and lane scenes apart, then the
// reliability of the detector's confidence over every clip.
func demoTables(done []*demoOutcome) string {
	type group struct {
		w, h                int
		stripe, lane, plain []*score.Result
	}
	groups := map[[2]int]*group{}
	var all []*score.Result
	nStripe := map[[2]int]int{}
	for _, oc := range done {
		k := [2]int{oc.w, oc.h}
		g := groups[k]
		if g == nil {
			g = &group{w: oc.w, h: oc.h}
			groups[k] = g
		}
		if oc.follow == synth.FollowLane {
			g.lane = append(g.lane, oc.res.score)
		} else {
			g.stripe = append(g.stripe, oc.res.score)
			nStripe[k]++
		}
		if oc.plain != nil {
			g.plain = append(g.plain, oc.plain)
		}
		all = append(all, oc.res.score)
	}
	var keys [][2]int
	most := 0
	for k := range groups {
		keys = append(keys, k)
		most = max(most, nStripe[k])
	}
	sort.Slice(keys, func(a, b int) bool { return keys[a][0]*keys[a][1] < keys[b][0]*keys[b][1] })
	var b strings.Builder
	b.WriteString("### Overall, per frame size\n\n")
	var over []*score.Result
	for _, k := range keys {
		g := groups[k]
		if len(g.stripe) > 0 {
			over = append(over, score.Combine(fmt.Sprintf("%d×%d stripe, hewline (%d scenes)", g.w, g.h, len(g.stripe)), g.stripe))
		}
		if len(g.plain) > 0 {
			over = append(over, score.Combine(fmt.Sprintf("%d×%d stripe, plain follower (%d scenes)", g.w, g.h, len(g.plain)), g.plain))
		}
		if len(g.lane) > 0 {
			over = append(over, score.Combine(fmt.Sprintf("%d×%d lane, hewline (%d scenes)", g.w, g.h, len(g.lane)), g.lane))
		}
	}
	score.WriteTable(&b, over)
	if set := cameraSet(done); len(set) > 0 {
		b.WriteString("\n### Dashed markings, low cameras and small frames\n\n")
		b.WriteString("The scenes of cheap vehicle cameras, over every size rendered: dashed and dotted lines\n")
		b.WriteString("(tags `dashed`, `dotted`), the grazing low camera (`grazing`), and every scene, stripe and\n")
		b.WriteString("lane, at 320×240 and smaller; the last row counts each clip once. Errors are in each clip's own\npixels.\n\n")
		score.WriteTable(&b, set)
	}
	for _, k := range keys {
		g := groups[k]
		fmt.Fprintf(&b, "\n### %d×%d\n\n", g.w, g.h)
		if n := nStripe[k]; n < most {
			fmt.Fprintf(&b, "A subset at this size: %d of the %d stripe scenes (rendering cost).\n\n", n, most)
		}
		if len(g.stripe) > 0 {
			b.WriteString("Stripe scenes:\n\n")
			rows := append(append([]*score.Result{}, g.stripe...), score.Combine("stripe overall", g.stripe))
			if len(g.plain) > 0 {
				rows = append(rows, score.Combine("plain follower, stripe overall", g.plain))
			}
			score.WriteTable(&b, rows)
		}
		if len(g.lane) > 0 {
			b.WriteString("\nLane scenes:\n\n")
			score.WriteTable(&b, append(append([]*score.Result{}, g.lane...), score.Combine("lane overall", g.lane)))
		}
	}
	b.WriteString("\n### Reliability of the detector's stated confidence (all clips)\n\n")
	score.WriteReliability(&b, score.Combine("all", all))
	return b.String()
}

// cameraSet combines the clips of done into the rows of the cheap-camera
// table (see demoTables): dashed or dotted scenes, low-camera scenes,
// frames of 320×240 or smaller, and all of those, each clip once. It is
// empty when done has none of them.
func cameraSet(done []*demoOutcome) []*score.Result {
	has := func(oc *demoOutcome, tags ...string) bool {
		for _, t := range oc.tags {
			if slices.Contains(tags, t) {
				return true
			}
		}
		return false
	}
	var dashed, low, small, union []*score.Result
	for _, oc := range done {
		in := false
		if has(oc, "dashed", "dotted") {
			dashed, in = append(dashed, oc.res.score), true
		}
		if has(oc, "grazing") {
			low, in = append(low, oc.res.score), true
		}
		if oc.w*oc.h <= 320*240 {
			small, in = append(small, oc.res.score), true
		}
		if in {
			union = append(union, oc.res.score)
		}
	}
	var rows []*score.Result
	for _, g := range []struct {
		name string
		rs   []*score.Result
	}{
		{"dashed and dotted", dashed},
		{"low camera", low},
		{"320×240 and smaller", small},
		{"all of these", union},
	} {
		if len(g.rs) > 0 {
			rows = append(rows, score.Combine(fmt.Sprintf("%s (%d clips)", g.name, len(g.rs)), g.rs))
		}
	}
	return rows
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

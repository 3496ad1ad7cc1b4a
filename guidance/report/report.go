package report

import (
	"encoding/base64"
	"encoding/json"
	"fmt"
	"html/template"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"github.com/hewline/hewline/guidance/tracklog"
)

// Input is one log to report on.
type Input struct {
	Path string        // where it was read from (shown, and used to find the clip)
	Log  *tracklog.Log // what was read; with Broken set, the part before the break
	// Broken is the verification error when the log failed its chain check
	// or was cut short; nil for a log that verified.
	Broken error
}

// Options tune Build.
type Options struct {
	Title     string
	Generated time.Time // shown in the report; pass the wall clock from the caller
	// NoThumbs skips reading the recordings for loss thumbnails.
	NoThumbs bool
}

// Report is a built report, ready to write.
type Report struct {
	Title     string
	Generated time.Time
	Inputs    []Input
	Logs      []Stats // one per input, in order
	Total     Stats   // all inputs together
	bins      []int
}

// MaxThumbs caps the thumbnails read per log (the first losses get them).
const MaxThumbs = 200

// Bins is the number of bins of the confidence histogram.
const Bins = 20

// Build computes the statistics of every input and, unless opt.NoThumbs,
// reads a thumbnail of the first frame of each loss from the log's
// recording when it can be found. It does not retain the inputs' logs
// beyond the Report.
func Build(in []Input, opt Options) (*Report, error) {
	if len(in) == 0 {
		return nil, fmt.Errorf("report: no logs")
	}
	r := &Report{Title: opt.Title, Generated: opt.Generated, Inputs: in}
	if r.Title == "" {
		r.Title = "hewline tracking report"
	}
	var logs []*tracklog.Log
	for _, x := range in {
		if x.Log == nil {
			return nil, fmt.Errorf("report: %s: no log", x.Path)
		}
		s := Compute(filepath.Base(x.Path), x.Log)
		if !opt.NoThumbs && len(s.Losses) > 0 {
			if src := FindSource(x.Path, x.Log.Header.Source); src != "" {
				frames := make([]int, min(len(s.Losses), MaxThumbs))
				for i := range frames {
					frames[i] = s.Losses[i].StartFrame
				}
				if th, err := Thumbs(src, frames); err == nil {
					for i := range th {
						s.Losses[i].Thumb = th[i]
					}
				}
			}
		}
		r.Logs = append(r.Logs, s)
		logs = append(logs, x.Log)
	}
	r.Total = Combine("all logs", r.Logs, logs)
	r.bins = histBins(logs, Bins)
	return r, nil
}

func offsetOf(r *tracklog.Record) (float64, bool) { return r.OffsetPx, r.Tracking }
func confOf(r *tracklog.Record) (float64, bool)   { return r.Confidence, true }

// offsetRange is the symmetric offset axis for a log: half the frame
// width, or the largest offset seen when the width is unknown.
func offsetRange(l *tracklog.Log) float64 {
	if l.Header.Width > 0 {
		return float64(l.Header.Width) / 2
	}
	m := 10.0
	for _, r := range l.Records {
		m = max(m, r.OffsetPx, -r.OffsetPx)
	}
	return m
}

// PNGNames returns the file names WritePNGs writes for prefix: one series
// pair per log, then the histogram and the state bars.
func (r *Report) PNGNames(prefix string) []string {
	var n []string
	for i := range r.Logs {
		n = append(n, fmt.Sprintf("%s-%d-offset.png", prefix, i+1), fmt.Sprintf("%s-%d-confidence.png", prefix, i+1))
	}
	return append(n, prefix+"-histogram.png", prefix+"-states.png")
}

// WritePNGs saves each plot as a PNG drawn with gonum/plot, named as
// PNGNames(prefix) says (prefix may include a directory), and returns the
// paths.
func (r *Report) WritePNGs(prefix string) ([]string, error) {
	names := r.PNGNames(prefix)
	k := 0
	for i, s := range r.Logs {
		l := r.Inputs[i].Log
		or := offsetRange(l)
		if err := seriesPNG(names[k], s.Name+": offset", "offset (px)", l, s.Alarms, -or, or, offsetOf); err != nil {
			return nil, err
		}
		if err := seriesPNG(names[k+1], s.Name+": confidence", "confidence", l, s.Alarms, 0, 1, confOf); err != nil {
			return nil, err
		}
		k += 2
	}
	if err := histPNG(names[k], r.bins); err != nil {
		return nil, err
	}
	if err := statesPNG(names[k+1], r.Total.StateSeconds); err != nil {
		return nil, err
	}
	return names, nil
}

// view is what the template sees.
type view struct {
	*Report
	Sections []section
	Hist     template.HTML
	States   template.HTML
	Broken   []Input
	StateRow []stateRow
}

type section struct {
	Index      int
	Stats      Stats
	In         Input
	Offset     template.HTML
	Confidence template.HTML
	Losses     []lossView
	Settings   []kv
}

type lossView struct {
	Loss
	Thumb template.URL
}

type kv struct{ K, V string }

type stateRow struct {
	State  string
	Frames int
	Sec    float64
	Pct    float64
}

// settingsRows flattens the header's settings (and the other header
// fields that describe the run) into sorted key/value rows.
func settingsRows(h tracklog.Header) []kv {
	rows := []kv{{"tool", h.Tool}, {"source", h.Source}, {"kind", h.Kind},
		{"frame size", fmt.Sprintf("%d×%d", h.Width, h.Height)}, {"fps", fmt.Sprintf("%g", h.FPS)},
		{"follow", h.Follow}, {"started", h.Started}}
	var keys []string
	for k := range h.Settings {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		var v string
		switch x := h.Settings[k].(type) {
		case string:
			v = x
		default:
			b, err := json.Marshal(x)
			if err != nil {
				v = fmt.Sprint(x)
			} else {
				v = string(b)
			}
		}
		rows = append(rows, kv{"settings." + k, v})
	}
	return rows
}

// WriteHTML writes the report as one self-contained HTML page: inline
// CSS, inline SVG plots, thumbnails as data: URLs, no script and no
// outside reference. Everything taken from the logs is HTML-escaped.
func (r *Report) WriteHTML(w io.Writer) error {
	v := view{Report: r}
	for i, s := range r.Logs {
		l := r.Inputs[i].Log
		or := offsetRange(l)
		sec := section{Index: i + 1, Stats: s, In: r.Inputs[i], Settings: settingsRows(l.Header),
			Offset: template.HTML(seriesSVG(fmt.Sprintf("plot-offset-%d", i+1), s.Name+": offset", "offset (px)",
				l, s.Alarms, -or, or, offsetOf)),
			Confidence: template.HTML(seriesSVG(fmt.Sprintf("plot-confidence-%d", i+1), s.Name+": confidence", "confidence",
				l, s.Alarms, 0, 1, confOf)),
		}
		for _, ls := range s.Losses {
			lv := lossView{Loss: ls}
			if len(ls.Thumb) > 0 {
				lv.Thumb = template.URL("data:image/jpeg;base64," + base64.StdEncoding.EncodeToString(ls.Thumb))
			}
			sec.Losses = append(sec.Losses, lv)
		}
		v.Sections = append(v.Sections, sec)
		if r.Inputs[i].Broken != nil {
			v.Broken = append(v.Broken, r.Inputs[i])
		}
	}
	v.Hist = template.HTML(histSVG("plot-histogram", r.bins))
	v.States = template.HTML(statesSVG("plot-states", r.Total.StateSeconds))
	for _, st := range stateOrder(r.Total.StateSeconds) {
		row := stateRow{State: st, Frames: r.Total.StateFrames[st], Sec: r.Total.StateSeconds[st]}
		if r.Total.Duration > 0 {
			row.Pct = 100 * row.Sec / r.Total.Duration
		}
		v.StateRow = append(v.StateRow, row)
	}
	if err := page.Execute(w, v); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	return nil
}

// WriteFile writes the HTML to path and the PNGs beside it (path without
// its extension as the prefix). It returns the PNG paths.
func (r *Report) WriteFile(path string) ([]string, error) {
	f, err := os.Create(path)
	if err != nil {
		return nil, fmt.Errorf("report: %w", err)
	}
	if err := r.WriteHTML(f); err != nil {
		f.Close()
		return nil, err
	}
	if err := f.Close(); err != nil {
		return nil, fmt.Errorf("report: %w", err)
	}
	return r.WritePNGs(strings.TrimSuffix(path, filepath.Ext(path)))
}

var funcs = template.FuncMap{
	"inc": func(i int) int { return i + 1 },
	"f1":  func(x float64) string { return fmt.Sprintf("%.1f", x) },
	"f2":  func(x float64) string { return fmt.Sprintf("%.2f", x) },
	"ts": func(t time.Time) string {
		if t.IsZero() {
			return ""
		}
		return t.UTC().Format(time.RFC3339)
	},
}

var page = template.Must(template.New("page").Funcs(funcs).Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>{{.Title}}</title>
<style>
body{font-family:sans-serif;margin:1.5em;color:#222;max-width:1000px}
table{border-collapse:collapse;margin:.5em 0}
td,th{border:1px solid #ccc;padding:3px 8px;text-align:left;font-size:14px}
th{background:#eee}
.num{text-align:right}
.broken{background:#c0392b;color:#fff;padding:.8em;font-size:18px;font-weight:bold}
.note{color:#555;font-size:13px}
code{font-size:12px;word-break:break-all}
</style></head><body>
<h1>{{.Title}}</h1>
<p class="note">Generated {{ts .Generated}} by hewline from {{len .Inputs}} track log(s). Not a certified safety record: the logs' SHA-256 chain shows they were not altered after writing, nothing more.</p>
{{if .Broken}}<div class="broken" id="broken">WARNING: {{len .Broken}} log(s) FAILED verification; their figures below cover only the lines before the break.<ul>
{{range .Broken}}<li>{{.Path}}: {{.Broken}}</li>{{end}}</ul></div>{{end}}
<h2>All logs</h2>
<table id="totals">
<tr><th>frames</th><td class="num">{{.Total.Frames}}</td></tr>
<tr><th>duration</th><td class="num">{{f2 .Total.Duration}} s</td></tr>
<tr><th>tracking</th><td class="num">{{.Total.TrackingFrames}} frames ({{f1 .Total.TrackingPct}} %)</td></tr>
<tr><th>alarm</th><td class="num">{{.Total.AlarmFrames}} frames in {{len .Total.Alarms}} period(s)</td></tr>
<tr><th>losses of tracking</th><td class="num">{{len .Total.Losses}}</td></tr>
<tr><th>dropped frames</th><td class="num">{{.Total.Drops}}</td></tr>
<tr><th>decision latency</th><td class="num">{{with .Total.Latency}}p50 {{f1 .P50}} ms, p95 {{f1 .P95}} ms, p99 {{f1 .P99}} ms, max {{f1 .Max}} ms ({{.N}} frames){{else}}not logged (replayed runs have none){{end}}</td></tr>
</table>
<h3>Time in each state</h3>
<table id="states"><tr><th>state</th><th>frames</th><th>seconds</th><th>share</th></tr>
{{range .StateRow}}<tr><td>{{.State}}</td><td class="num">{{.Frames}}</td><td class="num">{{f2 .Sec}}</td><td class="num">{{f1 .Pct}} %</td></tr>{{end}}
</table>
{{.States}}
<h3>Confidence histogram</h3>
{{.Hist}}
{{range .Sections}}
<h2 id="log-{{.Index}}">{{.Index}}. {{.Stats.Name}}</h2>
<p class="note">{{.In.Path}} — source {{.Stats.Source}} — ended: {{if .Stats.End}}{{.Stats.End}}{{else}}<b>no summary line (the run was cut short)</b>{{end}}{{if .In.Broken}} — <b>FAILED verification: {{.In.Broken}}</b>{{end}}</p>
<table class="logstats">
<tr><th>frames</th><td class="num">{{.Stats.Frames}}</td><th>tracking</th><td class="num">{{.Stats.TrackingFrames}} ({{f1 .Stats.TrackingPct}} %)</td>
<th>alarm frames</th><td class="num">{{.Stats.AlarmFrames}}</td><th>drops</th><td class="num">{{.Stats.Drops}}</td></tr>
</table>
<h3>Offset (while tracking) and confidence; alarm periods shaded</h3>
{{.Offset}}
{{.Confidence}}
<h3>Losses of tracking ({{len .Losses}})</h3>
{{if .Losses}}<table class="losses"><tr><th>#</th><th>frames</th><th>start (s)</th><th>duration (s)</th><th>alarm</th><th>cause</th><th>reason logged</th><th>first frame</th></tr>
{{range $i, $l := .Losses}}<tr class="loss"><td>{{inc $i}}</td><td>{{$l.StartFrame}}–{{$l.EndFrame}}</td><td class="num">{{f2 $l.Start}}</td><td class="num">{{f2 $l.Duration}}</td><td>{{if $l.Alarm}}yes{{else}}no{{end}}</td><td>{{$l.Cause}}</td><td>{{$l.Reason}}</td><td>{{if $l.Thumb}}<img class="thumb" alt="frame {{$l.StartFrame}}" src="{{$l.Thumb}}">{{else}}—{{end}}</td></tr>
{{end}}</table>{{else}}<p>none</p>{{end}}
<h3>Settings and calibration in force</h3>
<table class="settings">{{range .Settings}}<tr><th>{{.K}}</th><td><code>{{.V}}</code></td></tr>{{end}}</table>
{{end}}
</body></html>
`))

package report

import (
	"fmt"
	"html"
	"math"
	"sort"
	"strings"

	"github.com/hewline/hewline/guidance/tracklog"
)

// The SVG plots are written here, by hand, so that the report needs no
// script and no network. Every element that carries data has a class:
// "series" (a data path), "alarm" (a shaded alarm period), "bar" (a
// histogram or state bar); each plot's <svg> has an id.

const (
	svgW, svgH = 900, 220
	padL, padR = 60, 20
	padT, padB = 20, 36
)

// scale maps [lo, hi] onto [a, b].
func scale(v, lo, hi, a, b float64) float64 {
	if hi == lo {
		return a
	}
	return a + (v-lo)/(hi-lo)*(b-a)
}

// niceTicks returns about n round tick values covering [lo, hi].
func niceTicks(lo, hi float64, n int) []float64 {
	if !(hi > lo) {
		return []float64{lo}
	}
	raw := (hi - lo) / float64(n)
	mag := math.Pow(10, math.Floor(math.Log10(raw)))
	step := mag
	for _, m := range []float64{1, 2, 5, 10} {
		if m*mag >= raw {
			step = m * mag
			break
		}
	}
	var t []float64
	for v := math.Ceil(lo/step) * step; v <= hi+step*1e-9; v += step {
		t = append(t, math.Round(v/step)*step)
	}
	return t
}

func fmtTick(v float64) string { return strings.TrimSuffix(fmt.Sprintf("%.4g", v), ".0") }

// seriesSVG draws one value of each record against time, with the alarm
// periods shaded. get returns the value and whether the record has one;
// a record without breaks the line.
func seriesSVG(id, title, unit string, l *tracklog.Log, alarms []Period, lo, hi float64, get func(*tracklog.Record) (float64, bool)) string {
	rs := l.Records
	var b strings.Builder
	fmt.Fprintf(&b, `<svg id="%s" width="%d" height="%d" viewBox="0 0 %d %d" role="img"><title>%s</title>`,
		id, svgW, svgH, svgW, svgH, html.EscapeString(title))
	if len(rs) == 0 {
		b.WriteString(`<text x="60" y="100">no records</text></svg>`)
		return b.String()
	}
	t0, t1 := rs[0].T, rs[len(rs)-1].T
	if t1 <= t0 {
		t1 = t0 + 1
	}
	x := func(t float64) float64 { return scale(t, t0, t1, padL, svgW-padR) }
	y := func(v float64) float64 {
		return scale(math.Max(lo, math.Min(hi, v)), lo, hi, svgH-padB, padT)
	}
	for _, a := range alarms {
		x0, x1 := x(a.Start), x(math.Min(a.Start+a.Duration, t1))
		fmt.Fprintf(&b, `<rect class="alarm" x="%.1f" y="%d" width="%.1f" height="%d" fill="#f4b4b4"><title>alarm %.2f s from %.2f s</title></rect>`,
			x0, padT, math.Max(x1-x0, 1), svgH-padT-padB, a.Duration, a.Start)
	}
	// Axes and ticks.
	fmt.Fprintf(&b, `<g stroke="#888" fill="none"><line x1="%d" y1="%d" x2="%d" y2="%d"/><line x1="%d" y1="%d" x2="%d" y2="%d"/></g>`,
		padL, svgH-padB, svgW-padR, svgH-padB, padL, padT, padL, svgH-padB)
	b.WriteString(`<g font-size="11" font-family="sans-serif" fill="#333">`)
	for _, v := range niceTicks(lo, hi, 4) {
		fmt.Fprintf(&b, `<text x="%d" y="%.1f" text-anchor="end">%s</text><line x1="%d" x2="%d" y1="%.1f" y2="%.1f" stroke="#ddd"/>`,
			padL-4, y(v)+4, fmtTick(v), padL, svgW-padR, y(v), y(v))
	}
	for _, v := range niceTicks(t0, t1, 8) {
		fmt.Fprintf(&b, `<text x="%.1f" y="%d" text-anchor="middle">%s</text>`, x(v), svgH-padB+14, fmtTick(v))
	}
	fmt.Fprintf(&b, `<text x="%d" y="%d" text-anchor="middle">time (s)</text>`, (svgW+padL)/2, svgH-4)
	fmt.Fprintf(&b, `<text x="12" y="%d" transform="rotate(-90 12 %d)" text-anchor="middle">%s</text></g>`,
		svgH/2, svgH/2, html.EscapeString(unit))
	// The data, one path with a move wherever a value is missing. A long
	// log is drawn as the minimum and maximum of each pixel column so
	// that the page stays small and no spike is lost.
	b.WriteString(`<path class="series" fill="none" stroke="#1f5fa8" stroke-width="1.3" d="`)
	pen := false
	point := func(px, v float64) {
		cmd := "L"
		if !pen {
			cmd = "M"
		}
		fmt.Fprintf(&b, "%s%.1f %.1f ", cmd, px, y(v))
		pen = true
	}
	cols := svgW - padL - padR
	if len(rs) <= 2*cols {
		for i := range rs {
			v, ok := get(&rs[i])
			if !ok {
				pen = false
				continue
			}
			point(x(rs[i].T), v)
		}
	} else {
		col, lo, hi, have := -1, 0.0, 0.0, false
		emit := func() {
			if have {
				px := float64(padL + col)
				point(px, lo)
				if hi != lo {
					point(px, hi)
				}
			}
		}
		for i := range rs {
			c := int(x(rs[i].T)) - padL
			if c != col {
				emit()
				col, have = c, false
			}
			v, ok := get(&rs[i])
			if !ok {
				emit()
				have, pen = false, false
				continue
			}
			if !have {
				lo, hi, have = v, v, true
			} else {
				lo, hi = math.Min(lo, v), math.Max(hi, v)
			}
		}
		emit()
	}
	b.WriteString(`"/></svg>`)
	return b.String()
}

// histBins counts confidences into n equal bins over [0, 1]; 1 goes into
// the last bin.
func histBins(ls []*tracklog.Log, n int) []int {
	bins := make([]int, n)
	for _, l := range ls {
		for _, r := range l.Records {
			k := int(math.Floor(r.Confidence * float64(n)))
			k = max(0, min(n-1, k))
			bins[k]++
		}
	}
	return bins
}

func histSVG(id string, bins []int) string {
	var b strings.Builder
	fmt.Fprintf(&b, `<svg id="%s" width="%d" height="%d" viewBox="0 0 %d %d" role="img"><title>confidence histogram</title>`,
		id, svgW, svgH, svgW, svgH)
	top := 1
	for _, c := range bins {
		top = max(top, c)
	}
	n := float64(len(bins))
	bw := float64(svgW-padL-padR) / n
	for i, c := range bins {
		h := scale(float64(c), 0, float64(top), 0, svgH-padT-padB)
		fmt.Fprintf(&b, `<rect class="bar" data-count="%d" x="%.1f" y="%.1f" width="%.1f" height="%.1f" fill="#3a8a4f"><title>%.2f–%.2f: %d frames</title></rect>`,
			c, padL+float64(i)*bw+1, svgH-padB-h, bw-2, h, float64(i)/n, float64(i+1)/n, c)
	}
	fmt.Fprintf(&b, `<g font-size="11" font-family="sans-serif" fill="#333"><line x1="%d" y1="%d" x2="%d" y2="%d" stroke="#888"/>`,
		padL, svgH-padB, svgW-padR, svgH-padB)
	for i := 0; i <= 10; i++ {
		fmt.Fprintf(&b, `<text x="%.1f" y="%d" text-anchor="middle">%.1f</text>`, scale(float64(i), 0, 10, padL, svgW-padR), svgH-padB+14, float64(i)/10)
	}
	fmt.Fprintf(&b, `<text x="%d" y="%d" text-anchor="middle">confidence (all frames)</text><text x="%d" y="%d" text-anchor="end">%d</text></g></svg>`,
		(svgW+padL)/2, svgH-4, padL-4, padT+4, top)
	return b.String()
}

// stateOrder lists the tracker's states first, in their usual order, then
// any others sorted.
func stateOrder(m map[string]float64) []string {
	known := []string{"seeking", "holding", "coasting", "lost", "regaining"}
	var out []string
	for _, k := range known {
		if _, ok := m[k]; ok {
			out = append(out, k)
		}
	}
	var rest []string
	for k := range m {
		if !contains(known, k) {
			rest = append(rest, k)
		}
	}
	sort.Strings(rest)
	return append(out, rest...)
}

func contains(ss []string, s string) bool {
	for _, x := range ss {
		if x == s {
			return true
		}
	}
	return false
}

var stateColour = map[string]string{"seeking": "#9a9a9a", "holding": "#3a8a4f", "coasting": "#d9a21b", "lost": "#c0392b", "regaining": "#5a7fc0"}

func statesSVG(id string, sec map[string]float64) string {
	names := stateOrder(sec)
	rowH := 26
	h := padT + rowH*max(1, len(names)) + padB
	var b strings.Builder
	fmt.Fprintf(&b, `<svg id="%s" width="%d" height="%d" viewBox="0 0 %d %d" role="img"><title>time in each state</title>`,
		id, svgW, h, svgW, h)
	top := 0.0
	for _, v := range sec {
		top = math.Max(top, v)
	}
	b.WriteString(`<g font-size="12" font-family="sans-serif" fill="#333">`)
	for i, n := range names {
		col := stateColour[n]
		if col == "" {
			col = "#777"
		}
		w := scale(sec[n], 0, math.Max(top, 1e-9), 0, svgW-padL-padR-160)
		yy := padT + i*rowH
		fmt.Fprintf(&b, `<text x="%d" y="%d" text-anchor="end">%s</text><rect class="bar" data-state="%s" x="%d" y="%d" width="%.1f" height="%d" fill="%s"/><text x="%.1f" y="%d">%.2f s</text>`,
			padL+20, yy+17, html.EscapeString(n), html.EscapeString(n), padL+26, yy+3, math.Max(w, 1), rowH-6, col, float64(padL+30)+w, yy+17, sec[n])
	}
	b.WriteString(`</g></svg>`)
	return b.String()
}

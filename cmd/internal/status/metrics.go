package status

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
)

// The exposition below follows the Prometheus text format, version 0.0.4
// (https://prometheus.io/docs/instrumenting/exposition_formats/): one
// "# HELP" and one "# TYPE" line per metric family, then one
// "name{label="value",...} number" line per sample; label values escape
// backslash, double quote and newline; a histogram is a family of
// cumulative name_bucket{le="..."} samples ending with le="+Inf", plus
// name_sum and name_count.

// latencyBuckets are the upper bounds, in seconds, of the decision
// latency histogram: a few ms for a fast frame up to a second for a
// stalled one. 33 ms is one frame at 30 fps (common practice for cameras).
var latencyBuckets = []float64{0.005, 0.01, 0.02, 0.033, 0.05, 0.075, 0.1, 0.15, 0.25, 0.5, 1}

// histogram is a cumulative-free histogram; counts[i] counts observations
// in (bounds[i-1], bounds[i]], counts[len(bounds)] those above the last.
type histogram struct {
	bounds []float64
	counts []uint64
	sum    float64
	n      uint64
}

func newHistogram(bounds []float64) histogram {
	return histogram{bounds: bounds, counts: make([]uint64, len(bounds)+1)}
}

func (h *histogram) observe(v float64) {
	i := 0
	for i < len(h.bounds) && v > h.bounds[i] {
		i++
	}
	h.counts[i]++
	h.sum += v
	h.n++
}

// promWriter writes metric families; the first write error sticks.
type promWriter struct {
	w   io.Writer
	err error
}

func (p *promWriter) printf(format string, a ...any) {
	if p.err == nil {
		_, p.err = fmt.Fprintf(p.w, format, a...)
	}
}

func (p *promWriter) family(name, typ, help string) {
	p.printf("# HELP %s %s\n# TYPE %s %s\n", name, escapeHelp(help), name, typ)
}

func (p *promWriter) sample(name string, v float64, labels ...string) {
	p.printf("%s%s %s\n", name, labelText(labels), formatValue(v))
}

func (p *promWriter) histogram(name, help string, h *histogram) {
	p.family(name, "histogram", help)
	var cum uint64
	for i, b := range h.bounds {
		cum += h.counts[i]
		p.sample(name+"_bucket", float64(cum), "le", formatValue(b))
	}
	p.sample(name+"_bucket", float64(h.n), "le", "+Inf")
	p.sample(name+"_sum", h.sum)
	p.sample(name+"_count", float64(h.n))
}

// labelText renders name/value pairs as {a="x",b="y"}; none renders "".
func labelText(kv []string) string {
	if len(kv) == 0 {
		return ""
	}
	var b strings.Builder
	b.WriteByte('{')
	for i := 0; i+1 < len(kv); i += 2 {
		if i > 0 {
			b.WriteByte(',')
		}
		b.WriteString(kv[i])
		b.WriteString(`="`)
		b.WriteString(escapeLabel(kv[i+1]))
		b.WriteByte('"')
	}
	b.WriteByte('}')
	return b.String()
}

var labelEscaper = strings.NewReplacer(`\`, `\\`, `"`, `\"`, "\n", `\n`)
var helpEscaper = strings.NewReplacer(`\`, `\\`, "\n", `\n`)

func escapeLabel(s string) string { return labelEscaper.Replace(s) }
func escapeHelp(s string) string  { return helpEscaper.Replace(s) }

// formatValue writes a sample value as the format spells it: +Inf, -Inf,
// NaN, or a Go float.
func formatValue(v float64) string {
	switch {
	case math.IsInf(v, 1):
		return "+Inf"
	case math.IsInf(v, -1):
		return "-Inf"
	case math.IsNaN(v):
		return "NaN"
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

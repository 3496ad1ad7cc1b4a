package score

import (
	"fmt"
	"io"
	"math"
	"strings"
)

// WriteTable writes results as a Markdown table, one row per result.
func WriteTable(w io.Writer, rs []*Result) error {
	var b strings.Builder
	b.WriteString("| clip | frames | visible | recall | median px | p95 px | false tracks | losses | max alarm latency s | missed alarms | false alarms |\n")
	b.WriteString("|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|\n")
	for _, r := range rs {
		fmt.Fprintf(&b, "| %s | %d | %d | %.3f | %s | %s | %d (%.2f %%) | %d | %s | %d | %d |\n",
			r.Name, r.Frames, r.VisibleFrames, r.Recall(), num(r.MedianError(), 2), num(r.P95Error(), 2),
			r.FalseTracks, 100*r.FalseTrackRate(), r.Losses, num(r.MaxLatency(), 3), r.MissedAlarms, r.FalseAlarms)
	}
	_, err := io.WriteString(w, b.String())
	return err
}

// WriteReliability writes the reliability table of r: for each band of
// the detector's stated confidence, the observed fraction of frames whose
// centreline was within tolerance.
func WriteReliability(w io.Writer, r *Result) error {
	var b strings.Builder
	b.WriteString("| stated confidence | frames | observed within tolerance |\n|---|---:|---:|\n")
	for i, bin := range r.Bins {
		if bin.N == 0 {
			continue
		}
		fmt.Fprintf(&b, "| %.1f–%.1f | %d | %.3f |\n", float64(i)/10, float64(i+1)/10, bin.N, float64(bin.Within)/float64(bin.N))
	}
	_, err := io.WriteString(w, b.String())
	return err
}

func num(x float64, prec int) string {
	switch {
	case math.IsNaN(x):
		return "–"
	case math.IsInf(x, 1):
		return "missed"
	}
	return fmt.Sprintf("%.*f", prec, x)
}

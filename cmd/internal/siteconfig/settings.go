package siteconfig

import (
	"fmt"
	"io"
	"reflect"
	"strings"
	"text/tabwriter"
)

// Setting is one effective setting and where its value came from.
type Setting struct {
	// Field is the dotted field path, as in the file.
	Field string
	// Value is the value as the file would write it.
	Value string
	// From is "default", "line N" or "flag -NAME".
	From string
}

// Settings lists every setting in file order of the fields.
func (s *Site) Settings() []Setting {
	var out []Setting
	var walk func(v reflect.Value, path string)
	walk = func(v reflect.Value, path string) {
		if v.Kind() == reflect.Struct {
			names, index := fields(v.Type())
			for _, n := range names {
				walk(v.Field(index[n]), join(path, n))
			}
			return
		}
		from := "default"
		if fl, ok := s.flags[path]; ok {
			from = "flag -" + fl
		} else if n, ok := s.lines[path]; ok {
			from = fmt.Sprintf("line %d", n)
		}
		val := show(v)
		if v.Kind() == reflect.Slice {
			val = fmt.Sprint(v.Interface())
		}
		out = append(out, Setting{Field: path, Value: val, From: from})
	}
	walk(reflect.ValueOf(s).Elem(), "")
	return out
}

// summaryFields are always shown by WriteSummary; other fields only when
// the file or a flag set them.
var summaryFields = map[string]bool{
	"camera.device": true, "camera.pixel_format": true, "camera.width": true, "camera.height": true, "camera.fps": true,
	"follow": true, "detector.roi.left": true, "detector.roi.top": true, "detector.roi.right": true, "detector.roi.bottom": true,
	"detector.polarity": true, "detector.tape_colour": true, "detector.tape_width_mm": true,
	"alarm.fail_safe_after": true, "alarm.reacquire_for": true,
	"cues.speaker": true, "cues.require_alarm": true, "cues.vibrate_serial": true, "cues.vibrate_gpio": true, "cues.sound.mode": true,
	"outputs.stream": true, "outputs.track_dir": true, "outputs.record_dir": true,
	"calibration.file": true, "calibration.lookahead_mm": true,
}

// WriteSummary writes the main effective settings, and every other one
// the file or a flag set, as a table with where each value came from.
func (s *Site) WriteSummary(w io.Writer) error {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "SETTING\tVALUE\tFROM")
	for _, st := range s.Settings() {
		if !summaryFields[st.Field] && st.From == "default" {
			continue
		}
		v := st.Value
		if v == `""` {
			v = "(none)"
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\n", st.Field, v, st.From)
	}
	return tw.Flush()
}

// Warnings lists settings that are valid but take away a safeguard, for
// "hewline config check" and the run's start-up report to show loudly.
func (s *Site) Warnings() []string {
	var w []string
	if !s.Cues.RequireAlarm {
		w = append(w, "cues.require_alarm is false: the run goes on even when no channel can sound the fail-safe alarm")
	}
	if !s.Cues.Speaker {
		w = append(w, "cues.speaker is false: the alarm needs another channel to be heard")
	}
	if strings.TrimSpace(s.Calibration.File) == "" {
		w = append(w, "no calibration.file: offsets are in image pixels, not millimetres")
	}
	return w
}

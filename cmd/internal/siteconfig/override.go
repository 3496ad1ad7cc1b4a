package siteconfig

import (
	"flag"
	"fmt"
	"reflect"
	"sort"
	"strconv"
	"time"
)

// FlagFields maps the hewline run/replay flags that a site file also sets
// to their field paths. Override applies only these.
var FlagFields = map[string]string{
	"camera":         "camera.device",
	"follow":         "follow",
	"lane-width-mm":  "lane.width_mm",
	"lane-width-px":  "lane.width_px",
	"polarity":       "detector.polarity",
	"failsafe":       "alarm.fail_safe_after",
	"reacquire":      "alarm.reacquire_for",
	"speaker":        "cues.speaker",
	"require-alarm":  "cues.require_alarm",
	"vibrate-serial": "cues.vibrate_serial",
	"vibrate-gpio":   "cues.vibrate_gpio",
	"stream":         "outputs.stream",
	"calib":          "calibration.file",
}

// Override puts the flags of fs that the user actually set (fs.Visit:
// after fs.Parse, a flag left at its default is not visited) over the
// site's values, then checks the result again. Precedence is therefore
// defaults < file < flags. Flags not in FlagFields are ignored.
//
// Each overriding flag must report its value through flag.Getter (all
// the flag package's own kinds do; a flag.Func flag does not), so that
// no flag is dropped silently: a flag whose value cannot be read is a
// Problem. On any problem the site is left with the flags applied so far
// and an Errors is returned.
func (s *Site) Override(fs *flag.FlagSet) error {
	var probs Errors
	var set []*flag.Flag
	fs.Visit(func(f *flag.Flag) {
		if _, ok := FlagFields[f.Name]; ok {
			set = append(set, f)
		}
	})
	sort.Slice(set, func(i, j int) bool { return set[i].Name < set[j].Name })
	for _, f := range set {
		path := FlagFields[f.Name]
		g, ok := f.Value.(flag.Getter)
		if !ok {
			probs = append(probs, Problem{Field: "flag -" + f.Name, Msg: "its value cannot be read back to override the site file (make it a flag.Value with Get)"})
			continue
		}
		if err := s.set(path, g.Get()); err != nil {
			probs = append(probs, Problem{Field: "flag -" + f.Name, Msg: err.Error()})
			continue
		}
		s.flags[path] = f.Name
	}
	if len(probs) > 0 {
		return probs
	}
	if p := s.check(nil); len(p) > 0 {
		return Errors(p)
	}
	return nil
}

// set stores v (a flag's Get value) in the field at path.
func (s *Site) set(path string, v any) error {
	f, err := fieldByPath(s, path)
	if err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	val := reflect.ValueOf(v)
	switch {
	case val.Type() == f.Type():
		f.Set(val)
	case val.Kind() == reflect.Float64 && f.Kind() == reflect.Float64:
		// a float flag for a typed float field (millimetres)
		f.SetFloat(val.Float())
	case val.Kind() == reflect.String && f.Kind() == reflect.String:
		f.SetString(val.String())
	case val.Kind() == reflect.String:
		// A flag declared as a string for a typed field.
		str := val.String()
		switch {
		case f.Type() == durationType:
			d, err := time.ParseDuration(str)
			if err != nil {
				return fmt.Errorf("%q: want %s", str, want(f.Type()))
			}
			f.SetInt(int64(d))
		case f.Kind() == reflect.Bool:
			b, err := strconv.ParseBool(str)
			if err != nil {
				return fmt.Errorf("%q: want %s", str, want(f.Type()))
			}
			f.SetBool(b)
		default:
			return fmt.Errorf("%q: cannot set %s (%s)", str, path, f.Type())
		}
	default:
		return fmt.Errorf("a %s value cannot set %s (%s)", val.Type(), path, f.Type())
	}
	return nil
}

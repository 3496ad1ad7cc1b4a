package siteconfig

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"

	"gopkg.in/yaml.v3"
)

// maxFileSize bounds what Load reads: a site file is a page of text.
const maxFileSize = 1 << 20

// Load reads the site file at path over the defaults and checks it. On any
// mistake it returns nil and an Errors listing every problem found, each
// with its line and field.
func Load(path string) (*Site, error) {
	fi, err := os.Stat(path)
	if err != nil {
		return nil, fmt.Errorf("siteconfig: %w", err)
	}
	if fi.IsDir() {
		return nil, fmt.Errorf("siteconfig: %s is a folder, not a site file", path)
	}
	if fi.Size() > maxFileSize {
		return nil, fmt.Errorf("siteconfig: %s: %d bytes is too big for a site file (at most %d)", path, fi.Size(), maxFileSize)
	}
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("siteconfig: %w", err)
	}
	return Parse(path, data)
}

// Parse is Load on data already read; name is used in the messages. It
// does not retain data.
func Parse(name string, data []byte) (*Site, error) {
	s := Default()
	s.file = name
	d := &decoder{file: name, lines: s.lines, failed: map[string]bool{}}
	var doc yaml.Node
	if err := yaml.Unmarshal(data, &doc); err != nil {
		return nil, Errors{syntaxProblem(name, err)}
	}
	if len(doc.Content) == 0 {
		return nil, Errors{{File: name, Msg: "the file has no settings (start from \"hewline config example\")"}}
	}
	root := doc.Content[0]
	if root.Kind != yaml.MappingNode {
		return nil, Errors{{File: name, Line: root.Line, Msg: "want sections of \"key: value\" lines (start from \"hewline config example\")"}}
	}
	d.decodeStruct(root, reflect.ValueOf(s).Elem(), "")
	s.resolvePaths(filepath.Dir(name))
	s.Follow = strings.ToLower(strings.TrimSpace(s.Follow))
	d.probs = append(d.probs, s.check(d.failed)...)
	if len(d.probs) > 0 {
		sort.SliceStable(d.probs, func(i, j int) bool { return d.probs[i].Line < d.probs[j].Line })
		return nil, Errors(d.probs)
	}
	return s, nil
}

var syntaxLine = regexp.MustCompile(`^yaml: line (\d+): (.*)$`)

// syntaxProblem turns a yaml.v3 parse error into a Problem with its line.
func syntaxProblem(name string, err error) Problem {
	msg := err.Error()
	if m := syntaxLine.FindStringSubmatch(msg); m != nil {
		n, _ := strconv.Atoi(m[1])
		return Problem{File: name, Line: n, Msg: "not valid YAML here or on the next lines: " + m[2] + " (check the indentation and the \"key: value\" form)"}
	}
	return Problem{File: name, Msg: "not valid YAML: " + strings.TrimPrefix(msg, "yaml: ")}
}

// decoder walks the YAML node tree alongside a struct, so that each value
// keeps its line and each unknown key is reported where it stands.
type decoder struct {
	file  string
	lines map[string]int // field path → line of its value
	probs []Problem
	// failed holds the paths whose value could not be decoded.
	failed map[string]bool
}

func (d *decoder) addf(line int, field, format string, a ...any) {
	d.failed[field] = true
	d.probs = append(d.probs, Problem{File: d.file, Line: line, Field: field, Msg: fmt.Sprintf(format, a...)})
}

func join(path, name string) string {
	if path == "" {
		return name
	}
	return path + "." + name
}

// fields lists a struct's yaml names and their field indexes.
func fields(t reflect.Type) (names []string, index map[string]int) {
	index = map[string]int{}
	for i := 0; i < t.NumField(); i++ {
		f := t.Field(i)
		tag := strings.Split(f.Tag.Get("yaml"), ",")[0]
		if !f.IsExported() || tag == "" || tag == "-" {
			continue
		}
		names = append(names, tag)
		index[tag] = i
	}
	return names, index
}

// decodeStruct reads mapping node n into the struct v (already holding the
// defaults), at field path path.
func (d *decoder) decodeStruct(n *yaml.Node, v reflect.Value, path string) {
	if n.Kind == yaml.AliasNode {
		n = n.Alias
	}
	if n.Kind == yaml.ScalarNode && n.Tag == "!!null" {
		return // an empty section keeps the defaults
	}
	if n.Kind != yaml.MappingNode {
		d.addf(n.Line, path, "want a section of \"key: value\" lines, got %s", describe(n))
		return
	}
	names, index := fields(v.Type())
	seen := map[string]int{}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, val := n.Content[i], n.Content[i+1]
		p := join(path, k.Value)
		if k.Kind != yaml.ScalarNode {
			d.addf(k.Line, path, "a key must be a plain name")
			continue
		}
		if first, dup := seen[k.Value]; dup {
			d.addf(k.Line, p, "set twice (first on line %d); keep one", first)
			continue
		}
		seen[k.Value] = k.Line
		fi, ok := index[k.Value]
		if !ok {
			where := "at the top level"
			if path != "" {
				where = "in " + path
			}
			d.addf(k.Line, p, "unknown field%s (known %s: %s)", suggest(k.Value, names), where, strings.Join(names, ", "))
			continue
		}
		d.decodeValue(val, v.Field(fi), p)
	}
}

var durationType = reflect.TypeOf(time.Duration(0))

// decodeValue reads node n into field f at path p.
func (d *decoder) decodeValue(n *yaml.Node, f reflect.Value, p string) {
	if n.Kind == yaml.AliasNode {
		n = n.Alias
	}
	d.lines[p] = n.Line
	if f.Kind() == reflect.Struct {
		d.decodeStruct(n, f, p)
		return
	}
	if n.Kind == yaml.ScalarNode && n.Tag == "!!null" {
		d.addf(n.Line, p, "no value (give %s, or delete the line to keep the default %s)", want(f.Type()), show(f))
		return
	}
	if f.Kind() != reflect.Slice && n.Kind != yaml.ScalarNode {
		d.addf(n.Line, p, "want %s, got %s", want(f.Type()), describe(n))
		return
	}
	tmp := reflect.New(f.Type())
	if !tagFits(n, f.Type()) {
		d.addf(n.Line, p, "want %s, got %s", want(f.Type()), describe(n))
		return
	}
	if err := n.Decode(tmp.Interface()); err != nil {
		d.addf(n.Line, p, "want %s, got %s", want(f.Type()), describe(n))
		return
	}
	f.Set(tmp.Elem())
}

// tagFits reports whether scalar n's YAML type suits a field of type t.
// yaml.v3 on its own would turn 640.5 into the int 640 without a word.
func tagFits(n *yaml.Node, t reflect.Type) bool {
	if n.Kind != yaml.ScalarNode {
		return true // lists are checked element by element by Decode
	}
	tag := n.ShortTag()
	switch {
	case t == durationType:
		return tag == "!!str"
	case t.Kind() == reflect.Bool:
		return tag == "!!bool"
	case t.Kind() >= reflect.Int && t.Kind() <= reflect.Int64:
		return tag == "!!int"
	case t.Kind() == reflect.Float32 || t.Kind() == reflect.Float64:
		return tag == "!!int" || tag == "!!float"
	}
	return true
}

// want names what a field of type t takes.
func want(t reflect.Type) string {
	if t == durationType {
		return "a duration such as 300ms or 1.5s"
	}
	switch t.Kind() {
	case reflect.Bool:
		return "true or false"
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		return "a whole number"
	case reflect.Float32, reflect.Float64:
		return "a number"
	case reflect.String:
		return "a text value"
	case reflect.Slice:
		return "a list of " + strings.TrimPrefix(want(t.Elem()), "a ") + "s"
	}
	return t.String()
}

// show prints a field's current value the way the file would write it.
func show(f reflect.Value) string {
	if f.Type() == durationType {
		return time.Duration(f.Int()).String()
	}
	if f.Kind() == reflect.String {
		return strconv.Quote(f.String())
	}
	return fmt.Sprint(f.Interface())
}

// describe says what a node holds, for messages.
func describe(n *yaml.Node) string {
	switch n.Kind {
	case yaml.MappingNode:
		return "a section"
	case yaml.SequenceNode:
		return "a list"
	case yaml.ScalarNode:
		v := n.Value
		if len(v) > 40 {
			v = v[:40] + "..."
		}
		return strconv.Quote(v)
	}
	return "something else"
}

// suggest returns ` (did you mean "x"?)` for the known name closest to
// name, when one is close enough to be a typo.
func suggest(name string, known []string) string {
	best, bestD := "", 3
	for _, k := range known {
		if dd := distance(strings.ToLower(name), k); dd < bestD {
			best, bestD = k, dd
		}
	}
	if best == "" {
		return ""
	}
	return fmt.Sprintf(" (did you mean %q?)", best)
}

// distance is the Levenshtein edit distance between a and b.
func distance(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}

var errNoField = errors.New("no such field")

// fieldByPath finds the field at a dotted yaml path in s.
func fieldByPath(s *Site, path string) (reflect.Value, error) {
	v := reflect.ValueOf(s).Elem()
	for _, name := range strings.Split(path, ".") {
		if v.Kind() != reflect.Struct {
			return reflect.Value{}, errNoField
		}
		_, index := fields(v.Type())
		i, ok := index[name]
		if !ok {
			return reflect.Value{}, errNoField
		}
		v = v.Field(i)
	}
	return v, nil
}

// pathFields are the fields that name files or folders. A relative path
// in the file is relative to the site file's own folder, so that a site
// folder can be moved as a whole; a flag's path stays relative to the
// current folder, as on any command line.
var pathFields = []string{"calibration.file", "outputs.track_dir", "outputs.record_dir"}

func (s *Site) resolvePaths(dir string) {
	for _, p := range pathFields {
		if _, inFile := s.lines[p]; !inFile {
			continue
		}
		f, _ := fieldByPath(s, p)
		if v := f.String(); v != "" && !filepath.IsAbs(v) {
			f.SetString(filepath.Join(dir, v))
		}
	}
}

package siteconfig

import (
	"fmt"
	"strings"
)

// Problem is one mistake in a site file (or in a flag that overrides it).
type Problem struct {
	// File is the site file's path; Line its 1-based line, 0 when the
	// mistake has no line of its own (a flag, or a whole-file problem).
	File string
	Line int
	// Field is the dotted field path ("alarm.fail_safe_after"), or the
	// flag ("-failsafe") for a flag's mistake, or "" for a YAML syntax
	// error.
	Field string
	// Msg says what is wrong and what to do.
	Msg string
}

// Error formats the problem as "FILE:LINE: field: problem".
func (p Problem) Error() string {
	var b strings.Builder
	switch {
	case p.File != "" && p.Line > 0:
		fmt.Fprintf(&b, "%s:%d: ", p.File, p.Line)
	case p.File != "":
		fmt.Fprintf(&b, "%s: ", p.File)
	}
	if p.Field != "" {
		b.WriteString(p.Field)
		b.WriteString(": ")
	}
	b.WriteString(p.Msg)
	return b.String()
}

// Errors is every problem found in a site file, in file order. Load and
// Override return it as their error.
type Errors []Problem

// Error is one problem per line.
func (e Errors) Error() string {
	lines := make([]string, len(e))
	for i, p := range e {
		lines[i] = p.Error()
	}
	return strings.Join(lines, "\n")
}

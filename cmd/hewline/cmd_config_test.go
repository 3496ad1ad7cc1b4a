package main

import (
	"context"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// runInProcess runs the command through run() and returns its exit code
// and output.
func runInProcess(args ...string) (code int, stdout, stderr string) {
	var so, se strings.Builder
	code = run(context.Background(), args, &so, &se)
	return code, so.String(), se.String()
}

func TestConfigCommand(t *testing.T) {
	const fixtures = "../internal/siteconfig/testdata/site/"
	example := filepath.Join(t.TempDir(), "aisle-c.yaml")
	code, out, _ := runInProcess("config", "example")
	if code != 0 || !strings.Contains(out, "tape_colour: yellow") {
		t.Fatalf("config example: code %d, output %q", code, out)
	}
	if err := os.WriteFile(example, []byte(out), 0o644); err != nil {
		t.Fatal(err)
	}
	errLine := regexp.MustCompile(`^` + regexp.QuoteMeta(fixtures) + `values\.yaml:\d+: [a-z_.]+: `)
	for name, c := range map[string]struct {
		args     []string
		code     int
		stdout   []string // substrings
		stderr   []string
		errLines int // lines of stderr matching errLine (values.yaml), -1 = not checked
	}{
		"the printed example is valid": {
			args:   []string{"config", "check", example},
			stdout: []string{"valid", "alarm.fail_safe_after", "300ms", "line 31", "CAUTION: hewline is not a certified safety function"},
		},
		"mistakes: one line each, exit 1": {
			args: []string{"config", "check", fixtures + "values.yaml"}, code: 1,
			stderr:   []string{"values.yaml:14: alarm.fail_safe_after: 10ms is shorter than one frame interval", "15 mistakes"},
			errLines: 15,
		},
		"no caution for a broken file": {
			args: []string{"config", "check", fixtures + "typo.yaml"}, code: 1,
			stderr: []string{"typo.yaml:9: alarm.fail_safe_afer: unknown field"},
		},
		"missing file":        {args: []string{"config", "check", "no-such-site.yaml"}, code: 1, stderr: []string{"no-such-site.yaml"}},
		"no sub-command":      {args: []string{"config"}, code: 2, stderr: []string{"check FILE or example"}},
		"unknown sub-command": {args: []string{"config", "lint"}, code: 2, stderr: []string{`"lint"`}},
		"check without file":  {args: []string{"config", "check"}, code: 2},
		"help":                {args: []string{"config", "-h"}, stderr: []string{"usage: hewline config check FILE | example"}},
		"check help":          {args: []string{"config", "check", "-h"}, stderr: []string{"usage: hewline config check FILE"}},
		"help via help":       {args: []string{"help", "config"}, stderr: []string{"usage: hewline config"}},
	} {
		t.Run(name, func(t *testing.T) {
			code, out, errOut := runInProcess(c.args...)
			if code != c.code {
				t.Errorf("exit code %d, want %d\nstdout:\n%s\nstderr:\n%s", code, c.code, out, errOut)
			}
			for _, s := range c.stdout {
				if !strings.Contains(out, s) {
					t.Errorf("stdout lacks %q:\n%s", s, out)
				}
			}
			for _, s := range c.stderr {
				if !strings.Contains(errOut, s) {
					t.Errorf("stderr lacks %q:\n%s", s, errOut)
				}
			}
			if c.code != 0 && strings.Contains(out, "CAUTION") {
				t.Errorf("the caution is printed for a file that did not pass:\n%s", out)
			}
			if c.errLines > 0 {
				n := 0
				for _, l := range strings.Split(errOut, "\n") {
					if errLine.MatchString(l) {
						n++
					}
				}
				if n != c.errLines {
					t.Errorf("%d error lines of the form FILE:LINE: field: ..., want %d:\n%s", n, c.errLines, errOut)
				}
			}
		})
	}
}

package main

import (
	"bytes"
	"context"
	"testing"
)

// wantUsageErrors runs each named argument list and wants exit code 2 (a
// usage error) from every one.
func wantUsageErrors(t *testing.T, tests map[string][]string) {
	t.Helper()
	for name, args := range tests {
		t.Run(name, func(t *testing.T) {
			var out, errb bytes.Buffer
			if code := run(context.Background(), args, &out, &errb); code != 2 {
				t.Errorf("exit %d, want 2 (stderr %q)", code, errb.String())
			}
		})
	}
}

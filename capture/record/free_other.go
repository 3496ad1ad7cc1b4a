//go:build !linux

package record

import (
	"fmt"

	"github.com/hewline/hewline/capture"
)

// FreeBytes is not implemented on this platform; the Recorder then logs
// once that it cannot check and records on.
func FreeBytes(dir string) (uint64, error) {
	return 0, fmt.Errorf("record: free space of %s: %w", dir, capture.ErrNoHardware)
}

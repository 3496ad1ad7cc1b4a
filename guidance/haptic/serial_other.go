//go:build !linux

package haptic

import "fmt"

// OpenSerial is only supported on Linux; elsewhere it returns ErrNoHardware.
func OpenSerial(port string, baud int) (*Serial, error) {
	return nil, fmt.Errorf("haptic: serial %s: %w", port, ErrNoHardware)
}

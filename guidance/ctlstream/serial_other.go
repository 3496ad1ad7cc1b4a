//go:build !linux

package ctlstream

import "fmt"

// NewSerial is only supported on Linux; elsewhere it returns ErrNoHardware.
func NewSerial(port string, baud int, opt Options) (*Sender, error) {
	return nil, fmt.Errorf("ctlstream: serial %s: %w", port, ErrNoHardware)
}

package ctlstream

import (
	"fmt"

	"go.bug.st/serial"
)

// NewSerial returns a Sender that writes one NDJSON line per message to the
// serial port (for example /dev/ttyUSB0) at baud, 8N1. At 115200 baud a
// message of about 330 bytes takes about 29 ms, so 30 fps needs at least
// 115200 baud.
func NewSerial(port string, baud int, opt Options) (*Sender, error) {
	if baud <= 0 {
		return nil, fmt.Errorf("ctlstream: serial %s: bad baud rate %d", port, baud)
	}
	p, err := serial.Open(port, &serial.Mode{BaudRate: baud, DataBits: 8, Parity: serial.NoParity, StopBits: serial.OneStopBit})
	if err != nil {
		return nil, fmt.Errorf("ctlstream: open serial %s: %w", port, err)
	}
	return NewWriter(p, opt), nil
}

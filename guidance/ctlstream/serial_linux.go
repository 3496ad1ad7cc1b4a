package ctlstream

import (
	"fmt"

	"go.bug.st/serial"
)

// NewSerial returns a Sender that writes one NDJSON line per message to the
// serial port (for example /dev/ttyUSB0) at baud, 8N1. A calibrated
// message is about 355 bytes (measured by BenchmarkAppendJSON): 31 ms at
// 115200 baud, nearly a whole frame interval at 30 fps, so use 230400 baud
// or more for 30 fps.
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

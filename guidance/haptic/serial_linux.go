package haptic

import (
	"fmt"

	"go.bug.st/serial"
)

// OpenSerial opens a serial port (for example /dev/ttyACM0) at baud, 8N1,
// for a motor driver speaking the line protocol.
func OpenSerial(port string, baud int) (*Serial, error) {
	if baud <= 0 {
		return nil, fmt.Errorf("haptic: serial %s: bad baud rate %d", port, baud)
	}
	p, err := serial.Open(port, &serial.Mode{BaudRate: baud, DataBits: 8, Parity: serial.NoParity, StopBits: serial.OneStopBit})
	if err != nil {
		return nil, fmt.Errorf("haptic: open serial %s: %w", port, err)
	}
	return NewSerialWriter(p), nil
}

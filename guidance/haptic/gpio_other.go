//go:build !linux

package haptic

import "fmt"

// OpenGPIO is only supported on Linux; elsewhere it returns ErrNoHardware.
func OpenGPIO(leftPin, rightPin string, pwm bool) (*GPIO, error) {
	return nil, fmt.Errorf("haptic: GPIO %s, %s: %w", leftPin, rightPin, ErrNoHardware)
}

package haptic

import (
	"fmt"

	"periph.io/x/conn/v3/gpio"
	"periph.io/x/conn/v3/gpio/gpioreg"
	"periph.io/x/host/v3"
)

// OpenGPIO opens two output pins by their periph.io names (for example
// "GPIO17", or a character-device line name) and drives them low.
func OpenGPIO(leftPin, rightPin string, pwm bool) (*GPIO, error) {
	if _, err := host.Init(); err != nil {
		return nil, fmt.Errorf("haptic: GPIO init: %w", err)
	}
	var pins [2]gpio.PinIO
	for i, name := range []string{leftPin, rightPin} {
		p := gpioreg.ByName(name)
		if p == nil {
			return nil, fmt.Errorf("haptic: GPIO %q: %w", name, ErrPinNotFound)
		}
		if err := p.Out(gpio.Low); err != nil {
			return nil, fmt.Errorf("haptic: GPIO %q as output: %w", name, err)
		}
		pins[i] = p
	}
	return NewGPIOPins(pins[0], pins[1], pwm), nil
}

package haptic

import (
	"fmt"

	"periph.io/x/conn/v3/gpio"
	"periph.io/x/conn/v3/gpio/gpioreg"
	"periph.io/x/host/v3"
)

// OpenGPIO opens two output pins by their periph.io names and drives them
// low. host.Init loads periph's gpioioctl driver, which registers every
// line of every /dev/gpiochipN (the Linux GPIO character device) under its
// line name (for example "GPIO17" on a board whose device tree names it
// so); board drivers may add aliases. Pins that are not found give
// ErrPinNotFound.
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

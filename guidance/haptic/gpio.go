package haptic

import (
	"fmt"
	"sync"

	"periph.io/x/conn/v3/gpio"
	"periph.io/x/conn/v3/physic"
)

// Pin is the part of a periph.io gpio.PinOut that GPIO uses.
type Pin interface {
	Out(l gpio.Level) error
	PWM(duty gpio.Duty, f physic.Frequency) error
	Halt() error
}

// DefaultPWMFrequency is the PWM carrier for motor drive (our own choice,
// well above the rates of the patterns).
const DefaultPWMFrequency = 1 * physic.KiloHertz

// GPIO drives two motors, each through a transistor or driver on a GPIO
// pin. With PWM off any level above 0 switches the pin high; with PWM on
// the level sets the duty of the pin's hardware PWM. Safe for concurrent
// use.
type GPIO struct {
	mu          sync.Mutex
	left, right Pin
	pwm         bool
	freq        physic.Frequency
	halted      bool
	closed      bool
}

// NewGPIOPins drives the given pins. pwm selects hardware PWM (the pins
// must support it). GPIO owns the pins.
func NewGPIOPins(left, right Pin, pwm bool) *GPIO {
	return &GPIO{left: left, right: right, pwm: pwm, freq: DefaultPWMFrequency}
}

func (g *GPIO) drive(p Pin, l Level) error {
	if l == 0 {
		return p.Out(gpio.Low)
	}
	if !g.pwm {
		return p.Out(gpio.High)
	}
	return p.PWM(gpio.Duty(uint64(gpio.DutyMax)*uint64(l)/uint64(Full)), g.freq)
}

// Set drives both pins. Both are attempted even if the first fails.
func (g *GPIO) Set(left, right Level) error {
	g.mu.Lock()
	defer g.mu.Unlock()
	if g.halted {
		return ErrHalted
	}
	el := g.drive(g.left, left)
	er := g.drive(g.right, right)
	if el != nil {
		return fmt.Errorf("haptic: left motor pin: %w", el)
	}
	if er != nil {
		return fmt.Errorf("haptic: right motor pin: %w", er)
	}
	return nil
}

// Halt drives both pins low and makes Set return ErrHalted.
func (g *GPIO) Halt() error {
	g.mu.Lock()
	defer g.mu.Unlock()
	g.halted = true
	el := g.left.Out(gpio.Low)
	er := g.right.Out(gpio.Low)
	if el != nil {
		return fmt.Errorf("haptic: halt left motor pin: %w", el)
	}
	if er != nil {
		return fmt.Errorf("haptic: halt right motor pin: %w", er)
	}
	return nil
}

// Close halts and releases the pins.
func (g *GPIO) Close() error {
	herr := g.Halt()
	g.mu.Lock()
	defer g.mu.Unlock()
	if g.closed {
		return herr
	}
	g.closed = true
	el := g.left.Halt()
	er := g.right.Halt()
	switch {
	case herr != nil:
		return herr
	case el != nil:
		return fmt.Errorf("haptic: release left motor pin: %w", el)
	case er != nil:
		return fmt.Errorf("haptic: release right motor pin: %w", er)
	}
	return nil
}

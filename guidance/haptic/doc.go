// Package haptic turns guidance cues into vibration: two motors (left and
// right, worn or mounted where the operator feels them) that pulse on the
// side the vehicle must steer towards, faster and stronger as the offset
// grows, quiet inside a dead band, and a distinct alarm rhythm on both
// motors the moment tracking cannot be trusted.
//
// A Mapper turns a Cue into one Pattern per motor. A Vibrator plays the
// patterns in time on a Driver, driven by an injected clock and ticks, and
// Halts the motors at once when asked. Drivers: GPIO (periph.io pins,
// on/off or hardware PWM), Serial (a line protocol of our own to a small
// motor driver) and haptictest.Fake for tests.
//
// Coding (see /work/shared/REFERENCES.md): pulse rates of 1–8 per second
// are the usual range for coding a quantity by rate (NUREG-0700); guidance
// uses that range. Vibrotactile sensitivity peaks near 250 Hz (from
// memory): for a motor driven by PWM choose a motor and drive whose
// vibration lands near it; the PWM carrier itself is DefaultPWMFrequency.
//
// # Serial line protocol (version 1, our own)
//
// ASCII lines ending in "\n", host to motor driver, nothing back:
//
//	L <0-255> R <0-255>   set the left and right motor levels; arms the watchdog
//	H                     halt: both motors off, watchdog disarmed
//
// The Vibrator repeats the current levels at least every RefreshEvery, so a
// motor driver should treat RefreshEvery×2.5 (500 ms by default) without a
// line while armed as a lost host and vibrate its own alarm rather than
// fall silent: silence would feel like "on the line". An intentional stop
// sends H.
//
// # Safety
//
// Cues are an aid to a person and no certified safety function. The
// caller must pass Guide true only for estimates a confidence gate trusts
// (see ctlstream.Gate), and Alarm whenever tracking cannot be trusted; a
// cue with a non-finite offset is played as the alarm. Driver errors are
// returned from every call so the caller can raise the alarm on another
// channel; the Vibrator never hides them.
package haptic

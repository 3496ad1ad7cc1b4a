// Package ptytest opens pseudo-terminal pairs for tests of code that talks
// to serial ports (the controller stream's and the vibration driver's serial
// transports): the code under test opens the slave device as if it were a
// USB serial adapter, and the test reads the master end.
package ptytest

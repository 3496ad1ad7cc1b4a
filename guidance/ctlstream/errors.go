package ctlstream

import "errors"

// ErrNoHardware: the platform has no support for the transport (stubs).
var ErrNoHardware = errors.New("ctlstream: no hardware support on this platform")

// Package siteconfig reads hewline's site configuration file: one YAML file
// per site that holds the camera, the follow mode, the detector's region of
// interest and tape, the tracker and alarm timing, the operator cues, the
// outputs and the calibration file.
//
// Load checks the whole file and reports every mistake, each as
// "FILE:LINE: field.path: problem (what to do)": unknown or misspelt
// fields, values of the wrong type, and values that cannot work (a negative
// duration, a fraction outside 0..1, a fail-safe delay shorter than one
// frame, an unknown tape colour, a broadcast controller address...).
//
// Precedence is defaults < file < flags: Default gives the built-in
// settings, Load puts the file's values over them, and Site.Override puts
// the command-line flags the user actually set over both.
//
// The Site's accessors (Vision, Tracker, Audio, CameraPreference,
// StreamOptions) map the file into the configuration types of the packages
// that do the work, so that each setting has one meaning everywhere.
package siteconfig

// Package audio turns the guidance decision of each frame into sound: a
// guidance cue for the operator and the fail-safe alarm, rendered as PCM in
// Go and played through sinks (the speaker, a WAV file, or nothing).
//
// Audio only sounds what it is told. The pipeline hands a Cue per frame
// (guidance decides whether the alarm is on); a Synth renders it; a Player
// owns the Synth and the sinks, drops a sink that fails with a loud log line
// and reports ErrNoAlarmChannel when the last alarm channel is gone.
//
// # The guidance mapping
//
// The cue's error e is Offset + HeadingWeight·Heading, clamped to [−1, 1];
// positive e means the cart must steer right. With u = (|e| − DeadBand) /
// (1 − DeadBand), the distance past the dead band scaled to 0..1:
//
//   - |e| ≤ DeadBand: the cue is quiet (CentreGain times the edge level,
//     silent by default), centred, at MinPitchHz, steady.
//   - level of the louder channel: MinLevelDBFS + (LevelDBFS − MinLevelDBFS)·u
//     dBFS, so the cue grows louder with the error and goes quiet on target;
//   - balance: the channel on the side the cart must go plays at that level,
//     the other PanDBPerUnit·|e| dB lower (e > 0: right louder);
//   - tone mode: pitch MinPitchHz·(MaxPitchHz/MinPitchHz)^u Hz (equal
//     musical steps per unit of error);
//   - pulse mode: pitch stays at MinPitchHz and the tone is gated on and off
//     at MinPulseHz + (MaxPulseHz − MinPulseHz)·u pulses per second with duty
//     cycle PulseDuty (1–8 per second by default, the usual coding range).
//
// Published work on guidance sonification found that coding the error in
// both loudness and pitch and going quiet on target works well, and that
// pulse rates of 1–8 per second are the usual range (see the project's
// REFERENCES.md, "Alarms and cues").
//
// # The fail-safe alarm
//
// The alarm is a pulsed tone of harmonic components, all inside 500–2500 Hz
// (the band ISO 7731 recommends for auditory danger signals), in bursts of
// 10 pulses grouped 3+2+3+2 in the spirit of IEC 60601-1-8's high-priority
// alarm (from memory: 10 pulses per burst, pulses 75–200 ms long, spaced
// 50–125 ms, rise 10–20 % of the pulse, at least 4 harmonic components).
// While the alarm is on the guidance cue is muted so the two cannot be
// confused. Its level defaults to loud (−1 dBFS peak).
//
// # Timing
//
// Synth.Set takes effect at the next rendered sample; parameters glide over
// Mapping.Ramp to avoid clicks. A Player renders in buffers of at most 20 ms
// by default, so a cue change reaches the first changed sample within one
// buffer in real-time mode. In replay mode (Player.Advance) the samples
// follow frame timestamps exactly: a cue given for frame time t changes the
// sample at t·rate.
//
// Samples are float32, interleaved stereo (left, right), full scale ±1.
package audio

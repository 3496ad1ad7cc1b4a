// Package pipeline runs hewline's stages: a frame source, a detector, the
// tracker and the outputs, each stage in its own goroutine under an
// errgroup, connected by channels.
//
//	source ──frames──▶ detect+track ──results──▶ sinks (track log, video, cues, stream)
//
// Replay processes every frame in order. Live mode prefers fresh frames:
// when the next stage is still busy, the stale frame waiting for it is
// dropped (and counted) so the newest one goes through.
//
// Frames travel in a small pool of preallocated Mats that the pipeline owns;
// a Mat goes back to the pool when the last stage is done with it, so the
// steady state allocates no Mats. Stages and sinks must not retain a Mat
// they are handed.
package pipeline

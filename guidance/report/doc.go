// Package report turns track logs into an audit report for a shift or a
// set of clips: per-log and combined statistics (frames, time in each
// tracking state, alarm periods, every loss of tracking with its duration
// and cause, decision latency percentiles, dropped frames), plots written
// as inline SVG by this package and as PNG files with gonum/plot, a
// thumbnail of the first frame of each loss when the recording is found,
// and the settings in force, all in one self-contained HTML page that
// opens in a browser with no network.
//
// A loss of tracking is a maximal run of records with tracking false
// after tracking had been true at least once (the seek at the start of a
// run is not a loss), or with the alarm on. Its cause comes from the first
// reason in the run that Classify recognises.
package report

// Package tracklog writes and reads hewline's track log: one JSON object per
// line (NDJSON), a header first, one record per frame, a summary last.
//
// Every line ends with a "chain" field: the SHA-256, in hex, of the previous
// line's chain value followed by this line's bytes up to (not including)
// the chain field. The header's chain starts from the hash of nothing, so
// editing, deleting, inserting or reordering any line breaks the chain from
// that line on, and Verify reports the first line that fails. A torn last
// line (a crash mid-write) has no chain field or is not valid JSON, and is
// reported as such rather than misread.
//
// Lines are written with zerolog straight to the file, one write per line,
// so that a crash loses at most the frame being written.
//
// A long run can be split across files by size or log time with
// RotatingWriter: each file but the last ends with a summary whose end is
// "rotated" and names the next file, and each later file's header names
// the file before (prev_file) and its last chain value (prev_chain), from
// which the chain continues. VerifySet and ReadSet check a set of files
// for a missing, altered, cut or reordered file; GroupSets orders files
// into sets by their headers.
//
// The fields of each line are documented on Header, Record and Summary and
// in the README's "Track log" section; other tools read exactly these.
package tracklog

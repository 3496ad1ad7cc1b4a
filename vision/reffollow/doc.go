// Package reffollow is the plain reference follower hewline is compared
// with: the baseline of the score table, not a detector to steer with.
//
// It is the simple threshold-and-blob method a first line follower would
// use (common practice): grey image, OpenCV's adaptive mean threshold
// (block a tenth of the width, offset 10 grey levels), the largest blob
// reaching into the lower half, its centroid in each of 16 row bands, and
// a least-squares line through the centroids. It is told the stripe's
// polarity (hewline's own detector finds it). It has no confidence of its
// own: whenever it finds a blob it claims the line.
//
// It imports nothing from package vision, so that vision's tests can use
// it; cmd/hewline wraps it as a pipeline detector for "hewline demo
// -baseline".
package reffollow

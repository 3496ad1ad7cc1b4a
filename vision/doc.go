// Package vision finds a floor stripe (or a lane's two boundary lines) in a
// single frame and measures it in image pixels.
//
// A detector takes a BGR gocv.Mat and an optional Hint (the tracker's
// prediction) and returns a Detection: centreline points, lateral offset at
// a reference row, heading, apparent width and a confidence in [0, 1].
// Detectors never retain the Mat they are given.
//
// # The classical detector, stage by stage
//
//   - classical.go: the frame is scaled to a working width (WorkWidth) and
//     turned into a luminance evidence image and two chromaticity planes
//     divided by the luminance (so that shadows and exposure changes leave
//     them as they are). Light is normalised where crossings are measured:
//     as Weber contrast against the floor on either side.
//   - candidates.go: per row band (about 80 over the region of interest),
//     ridge filters of several widths find crossings of a stripe; each is
//     measured between its half-height edges, must have sharp edges and pass
//     a Sauvola test. Clipped (glare) and out-of-picture columns are kept, so
//     that a band lost in glare counts as missing evidence, not absence.
//     cutedge.go adds crossings that show one edge only (the other side
//     washed out by glare or beyond the region's side), placed half the
//     width remembered from the last trusted line in from that edge.
//   - fit.go: RANSAC over the crossings (with the tracker's prediction as a
//     gated prior), then refine: width and centre curves by weighted least
//     squares (the width line robustly: Siegel's repeated median where a
//     minority of crossings is far off it), crossings whose width
//     disagrees dropped, clipped crossings
//     left out of the centre fit where the line has unclipped ones, and
//     inliers above the line's own horizon (from its near widths) dropped.
//     Where the horizon lies in the region (a low camera), the reported
//     points follow the image of a path on the floor, x = A + B·u + C/u
//     with u the row's distance below that horizon (perspFit), when it
//     fits the inliers decisively better than the quadratic.
//     Dashed lines are run across a gap at the vehicle only under tested
//     rules (bridges, in detect.go); dashmem.go remembers a dashed
//     line's gap for a few frames, for frames that show a single dash.
//   - detect.go: the best line over the channels is chosen, compared with
//     the strongest other line (ambiguity), and report turns it into a
//     Detection whose confidence is the product of named factors; the
//     weakest one is the Reason (the track log's meas_reason).
//   - mirror.go (lamp reflections moving with the camera), floorroi.go
//     (region of interest from a floor calibration), lane.go and
//     lanefloor.go (lane mode), reliability.go (stated confidence against
//     observed accuracy).
//
// Image-plane conventions used throughout hewline:
//   - x grows to the right, y grows downwards, in the input frame's pixels;
//   - OffsetPx is x(line at the reference row) − W/2: positive when the
//     stripe lies right of the image centre (the vehicle must steer right);
//   - HeadingDeg is the angle of the centreline from the image's vertical
//     at the reference row, positive when the far end of the line leans to
//     the right (clockwise on the screen).
package vision

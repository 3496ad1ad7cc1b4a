// Package vision finds a floor stripe (or a lane's two boundary lines) in a
// single frame and measures it in image pixels.
//
// A detector takes a BGR gocv.Mat and an optional Hint (the tracker's
// prediction) and returns a Detection: centreline points, lateral offset at
// a reference row, heading, apparent width and a confidence in [0, 1].
// Detectors never retain the Mat they are given.
//
// Image-plane conventions used throughout hewline:
//   - x grows to the right, y grows downwards, in the input frame's pixels;
//   - OffsetPx is x(line at the reference row) − W/2: positive when the
//     stripe lies right of the image centre (the vehicle must steer right);
//   - HeadingDeg is the angle of the centreline from the image's vertical
//     at the reference row, positive when the far end of the line leans to
//     the right (clockwise on the screen).
package vision

// Package calib turns image pixels into floor millimetres.
//
// It has two parts, both stored in one calibration file of our own
// (see File):
//
//   - Lens: the camera's intrinsics (focal lengths fx, fy and principal
//     point cx, cy in pixels) and its distortion (OpenCV's five-coefficient
//     model k1, k2, p1, p2, k3), found by CalibrateLens from views of a
//     printed chessboard.
//   - Floor: a homography H from undistorted image pixels to floor
//     millimetres, found from four or more marked floor points
//     (FloorFromPoints), a chessboard laid flat (FloorFromBoard) or the
//     camera's height and pitch (FloorFromPose).
//
// A Mapper built from a File undistorts detected points (never whole
// frames: that is cheap) and maps them to the floor, and Measure turns an
// image centreline into the lateral offset at a look-ahead distance, the
// heading and the stripe width on the floor.
//
// # Floor frame
//
// Floor coordinates are millimetres in the vehicle's frame: X forward
// along the vehicle's axis, Y to the right, origin at the reference point
// the marks were measured from (for FloorFromPose, the floor point straight
// below the camera). So a positive offset means the stripe is right of the
// vehicle's axis, and a positive heading means the stripe's far end leans
// right: the same signs as the image-plane convention in package vision.
//
// # Image frame
//
// Image pixels are x right, y down, origin at the top-left pixel's centre,
// as in OpenCV. "Raw" pixels are where the camera put them (distorted);
// "undistorted" pixels are where an ideal pinhole camera with the same
// intrinsics would have put them.
//
// The package is no certified safety function: a Mapper says when a
// measurement cannot be trusted (FloorMeasure.OK false, with a reason) and
// callers must treat that as no measurement.
package calib

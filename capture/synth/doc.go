// Package synth is hewline's built-in synthetic floor scene: a renderer of
// a camera on a moving cart looking at a floor with a marked stripe, with
// ground truth for every frame computed from the same geometry.
//
// # Coordinate frames
//
// World: X and Y on the floor plane z = 0, Z up, metres; headings are
// counter-clockwise from +X seen from above. A Path is a tangent-continuous
// curve of straight segments and circular arcs parametrised by arc length
// s, so position, tangent and curvature are exact everywhere (Segment
// curvature is positive for a right turn).
//
// Cart: follows the stripe's path at Motion.SpeedMps with a sideways weave
// e(s) = WeaveAmpM·sin(2π s/WeaveWavelengthM + phase) (positive to the
// left), its heading along the tangent of its weaving track.
//
// Camera: mounted AheadM ahead of the cart point, HeightM above the floor,
// pitched PitchDeg down, optionally rolled and yawed, with vibration
// (Motion.ShakeDeg). Its frame is OpenCV's: x right, y down, z along the
// optical axis. Intrinsics Fx, Fy, Cx, Cy in pixels, pixel (i, j) centred
// at (i, j); radial distortion x_d = x·(1 + K1·r² + K2·r⁴) on normalised
// coordinates, the same model as OpenCV's k1, k2.
//
// # Rendering
//
// Each pixel's ray is undistorted once per Renderer; per frame it is only
// rotated and translated with the camera and intersected with the floor.
// Rays that miss the floor, or meet it beyond Backdrop.FarM, see a wall
// with rack uprights. The floor point is shaded from the floor (colour,
// mip-mapped concrete mottling, tiles and grout), the marks (distance to
// each mark's centreline along its normal, with gaps, dashes, wear and the
// end of the line along s), the light (shadow polygons, fixed or moving,
// with penumbrae; Blinn–Phong highlights of ceiling lamps on a glossy
// floor, which move with the camera), the exposure (gain, gain steps,
// flicker through a rolling shutter) and sensor noise. Edges are
// anti-aliased analytically: the floor displacement between neighbouring
// pixels gives each edge's width in pixels and the pixel's coverage is a
// one-pixel ramp across it, so rendered widths and centres match the
// truth. Motion blur averages several instants of the exposure. All noise
// is a hash of position, seed and frame: the same Scenario gives the same
// bytes on any number of cores.
//
// # Truth
//
// For each frame (at the middle of the exposure) the stripe's centreline
// and edges are sampled every 5 mm, projected through the same camera model
// (distortion included) and intersected with image rows. Points holds one
// [x, y] per even row from the bottom up, the first crossing along the path,
// only where the line is laid (not in a gap, not past its end), inside
// the image and not hidden by a prop; dashes and dots count as laid. With
// a rolling shutter each row's crossing uses that row's camera pose. OffsetPx, HeadingDeg and WidthPx are
// taken at the reference row 0.8·Height with package vision's conventions
// (OffsetPx = x − W/2). Visible is true when the laid line crosses at least
// half the sampled rows of the lower half of the image. OffsetM and
// HeadingFloorDeg are measured in the camera's floor frame (origin under
// the optical centre, forward along the optical axis's floor projection)
// where the line crosses LookaheadM ahead; positive is right. Frames where
// a gap or the end of the line is in the near half are tagged "gap" or
// "end"; each scenario adds its own condition tags.
//
// # Scenarios
//
// Names lists them; Lookup returns one. All are 640×480 at 30 fps, 300
// frames (fisheye-tight 360), variations of "weave" (the demo: even light,
// concrete, yellow 50 mm tape, weaving at 1 m/s): gap (a 1.6 m gap, then
// the end of the line), curves (radius down to 1.5 m), rack-shadows,
// walker (a moving shadow), glare, worn, floor-marks (tyre marks, joints, a
// crack), tiles, dim, flicker, exposure-jumps, shake (2 m/s with vibration
// and blur), fisheye, narrow (5 mm line, 3–5 px), branch (a branch and a
// crossing bar), tape-wide, tape-white, tape-blue, tape-green, tape-black
// (dark on light) and dark-floor.
//
// Lane mode (Scenario.Follow = "lane"): the cart drives along Stripe.Path,
// which is not drawn; the lane's two boundary lines run parallel to it at
// ±Lane.WidthM/2 (arcs with their radii shifted), each its own Mark with
// gaps given along the centre path. Truth then holds the centre in Points
// where at least one boundary is laid, the boundaries in Left and Right,
// and the lane width in LaneWidthPx and LaneWidthM. Lane scenarios:
// lane-straight, lane-s-curve (2 m radius), lane-one-side (each line worn
// away for a stretch), lane-mixed (white 50 mm and yellow 100 mm lines),
// lane-fisheye (forward-looking wide lens) and lane-reflections.
//
// Reflections (reflections.go): a glossy floor mirrors ceiling luminaires
// (Light.Tubes) by the law of reflection: a pixel whose ray meets the floor
// at P, reflected, rises to the lamp's height Z at P + (P − C)·Z/C.z, and
// sees the lamp when that point is on it. The streaks move with the
// camera, not with the floor. Scenarios reflections (stripe mode, with a
// gap in the tape) and lane-reflections.
//
// Cheap, low and wide-angle cameras and uneven markings (scenarios_camera.go):
// dashed (300/300 mm), dashed-short (100/150 mm), dashed-long (500/700 mm),
// dotted (80 mm dots), low-camera (5 cm up, looking level: the horizon
// below the middle, rack uprights, windows and a person above it),
// blur-heavy (dashes smeared into blobs), rolling-shutter (per-row poses),
// exposure-drift (automatic exposure and white balance hunting), jpeg-low
// (quality 10), fisheye-tight (strong barrel distortion, the line leaving
// the frame at the side in the bends) and uneven-paint (width and colour
// varying, repainted stretches).
//
// Scenario.Resized gives any other resolution (same horizontal field of
// view, square pixels). The warehouse is invented; colours are chosen by
// eye, not measured.
//
// Props (people, rack uprights) are flat cut-outs facing the camera, not
// anti-aliased; the backdrop is at infinity (no parallax). Motion blur is
// a few instants averaged (7 in blur-heavy), so a long smear shows steps
// in the near rows rather than a smooth ramp. JPEG blocking
// goes through OpenCV's own encoder. Not modelled: walls and racks as 3-D
// geometry, a real camera's exposure controller (the drift is a smooth
// random signal), shadows cast by props.
package synth

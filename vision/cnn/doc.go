// Package cnn is hewline's learned fallback detector: a small
// convolutional network that reads the stripe when the classical detector
// is unsure.
//
// # Model
//
// Row-anchor classification (Qin, Wang, Li, "Ultra Fast Structure-aware
// Deep Lane Detection", ECCV 2020): the region of interest is cut into
// Rows horizontal bands, and for the centre row of each band (an anchor
// row) the network classifies which of Cells equal column cells holds the
// stripe's centre, or "absent". The input is the region of interest in
// grey, shrunk to InW×InH by area averaging and standardised to zero mean
// and unit deviation (Preprocessor). The layers are 3×3 convolutions
// (padding 1) each followed by ReLU and 2×2 max-pooling, a dense layer with
// ReLU, a dense layer of Rows×(Cells+1) logits and a softmax per row
// (DefaultArch: 64×32 input, 8/16/16 channels, 64 hidden units, 8 rows, 32
// cells, 53 560 weights).
//
// Detector turns the probabilities into a vision.Detection: each row's
// centre is the probability-weighted mean of its best cell and the two
// neighbours; rows count only when that mass is at least MinRowConf; a
// weighted least-squares curve (straight for fewer than 5 rows, else
// quadratic) is fitted robustly (the row farthest off the curve is dropped
// while it lies more than one cell away) and must have MinRows rows on it,
// on both sides of the reference row. The curve gives the points, offset
// and heading (conventions of package vision); the confidence combines
// the rows' peak probabilities, how many rows saw the stripe and how well
// they agree with the curve (see Detector.Detect). Row gives each anchor
// row's own reading. WidthPx is always 0: the network does not measure
// width.
//
// The network reads each row in the context of the whole region, and it
// carries a line on across a gap or past its end: on the renderer's gap
// scene it reads the bare floor ahead of the line's end as "stripe" at
// 0.97–1.00. Its absent class does not catch this. So each fitted row is
// also checked against the image: Row.Seen needs the network input's
// column profile in the row's band to stand out at the row's X (at least
// MinRowContrast, 0.5 frame standard deviations, and three robust
// deviations of the band; common practice for "out of the noise", not a
// standard). On the gap scene real stripe rows show 1.6–7 and the bare
// rows 0.1–0.6. Coverage gives the share of Seen rows in a band of frame
// rows; pipeline.Fused asks it about the frame's lower half. Heavy motion
// blur near the camera also fails the check (the stripe is smeared flat
// there): the network is then not trusted on those rows either. The Hint is not used here: pipeline.Fused checks the result
// against the tracker's prediction and decides whether it may count.
//
// # Files and OpenCV
//
// The network is stored as ONNX (opset 13, IR 7), written by this package
// (MarshalONNX: the protobuf encoding of the few messages and node types
// used: Conv, Relu, MaxPool, Flatten, Gemm with transB=1, Reshape,
// Softmax) and run by OpenCV's DNN module through gocv (Load, Net).
// OpenCV 4.6 aborts the whole process on malformed ONNX, so Load first
// decodes the bytes in Go (UnmarshalONNX) and refuses anything that is not
// exactly what MarshalONNX writes for a valid architecture: empty,
// truncated, corrupted or foreign files get an error wrapping
// ErrInvalidModel. Model.Predict is a Go forward pass of the same weights;
// the tests hold OpenCV's output to it within 1e-4, and run the ONNX
// checker of Debian's python3-onnx on exported files.
//
// # Training
//
// "hewline train" trains in Go (Train): forward and backward passes of the
// layers above with gonum's BLAS (convolution by im2col), Adam (Kingma &
// Ba 2015 defaults β1 0.9, β2 0.999, ε 1e-8) on mini-batches, a step size
// decaying each epoch, left-right mirroring, a held-out validation split
// and early stopping on its loss; one seed fixes the scenes, the initial
// weights, the split and the shuffling. The data:
//   - quick image-plane scenes (RandomScene) with wide randomisation of
//     floor, tape colour, width, position, heading, curve, length and
//     light;
//   - frames of the renderer's scenarios (capture/synth, SynthSamples) with
//     randomised floor, tape, exposure, noise, route stretch and weave;
//   - site footage (SiteSamples): frames where a Labeler (the classical
//     detector) is confident become labels; each is kept clean and in
//     several degraded copies (Degrade: shadow, glare, wear, blur, noise,
//     dim light), so the network learns to read the stripe where the
//     classical detector fails.
//
// To train on a site's recordings, record the route in good light with
// "hewline record", then run
//
//	hewline train -o site.onnx -seed 1 -site aisle-c.mkv -site loading-bay.mkv
//
// (arguments after the flags are site recordings too: -site rec/*.avi)
// and point the site configuration at site.onnx. Only frames the classical
// detector rated at least -site-min-conf (0.8) are used, one in
// -site-every (5); check the log line per clip for how many were taken.
// Replay the recordings with the new model before it goes near a cart.
//
// # Calibration
//
// FitTemperature fits a softmax temperature on held-out samples
// (temperature scaling, Guo et al., ICML 2017) by the likelihood of the
// rows' readings as Detector makes them; ApplyTemperature folds it into
// the last layer, so the ONNX graph and the OpenCV check are unchanged
// ("hewline cnn-temperature" prints the reliability table before and
// after). On the shipped model it does not help: fitted T = 1.44, row
// expected calibration error 0.0558 before and 0.0563 after (3000 scenes
// and 1000 renderer frames, seed 1001). The over-confident rows are
// confident far-off readings and lines carried into gaps, which one
// temperature cannot separate from the right ones; the shipped model is
// left unscaled and the fusion checks rows against the image instead
// (Row.Seen).
//
// # The shipped model
//
// vision/cnn/shipped/stripe-rowanchor.onnx (about 210 KB) was trained with
//
//	hewline train -o vision/cnn/shipped/stripe-rowanchor.onnx -seed 1 -epochs 30
//
// (defaults: 16 000 image-plane scenes, 4 000 renderer frames, batch 32,
// step 2e-3 decaying by 0.9 per epoch, 15 % validation, patience 4) on one
// core of the project's machine, shared with other work: 20 minutes, all
// 30 epochs, best at epoch 28 with validation loss 1.152, row accuracy
// 0.654 (exact cell) and 0.824 within one cell (the validation set holds
// the degraded frames too; one cell is 20 px at 640 wide).
// The model's metadata records the command, seed and these figures; -o and
// -log do not change the weights. It was trained at commit 648d1e5: the
// renderer has gained scenarios since, so SynthSamples draws other frames
// and the same command now gives other weights; check out that commit to
// reproduce the file exactly.
//
// This detector is not a safety function: it is a second opinion for the
// tracker, whose confidence gate and fail-safe alarm stay in charge.
package cnn

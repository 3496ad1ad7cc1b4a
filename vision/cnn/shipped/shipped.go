// Package shipped holds the row-anchor CNN model that ships with hewline,
// embedded in the binary so that replay, run and the demo can use the
// fallback without a model file. How it was trained (command, seed and
// validation scores) is in vision/cnn's documentation and in
// stripe-rowanchor.train.log beside this file.
package shipped

import _ "embed"

// StripeRowAnchor is the ONNX bytes of the shipped stripe model. Callers
// must not modify the slice.
//
//go:embed stripe-rowanchor.onnx
var StripeRowAnchor []byte

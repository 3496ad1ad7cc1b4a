package cnn

import (
	"fmt"

	"gocv.io/x/gocv"
)

// Net is a validated model loaded into OpenCV's DNN module (CPU, OpenCV
// backend). It is not safe for concurrent use.
type Net struct {
	model *Model
	net   gocv.Net
	blob  gocv.Mat // [1,1,InH,InW] float32, reused for every call
}

// Load validates b in Go (see Validate) and only then hands it to
// gocv.ReadNetFromONNXBytes, so that a bad file gets an error wrapping
// ErrInvalidModel instead of aborting the process. Load does not retain b.
func Load(b []byte) (*Net, error) {
	m, err := UnmarshalONNX(b)
	if err != nil {
		return nil, err
	}
	net, err := gocv.ReadNetFromONNXBytes(b)
	if err != nil {
		return nil, fmt.Errorf("cnn: OpenCV refused the model: %w", err)
	}
	if net.Empty() {
		net.Close()
		return nil, fmt.Errorf("cnn: OpenCV loaded an empty network")
	}
	if err := net.SetPreferableBackend(gocv.NetBackendOpenCV); err != nil {
		net.Close()
		return nil, fmt.Errorf("cnn: set backend: %w", err)
	}
	if err := net.SetPreferableTarget(gocv.NetTargetCPU); err != nil {
		net.Close()
		return nil, fmt.Errorf("cnn: set target: %w", err)
	}
	a := m.Arch
	return &Net{model: m, net: net, blob: gocv.NewMatWithSizes([]int{1, 1, a.InH, a.InW}, gocv.MatTypeCV32F)}, nil
}

// Model returns the decoded weights (for the Go reference pass and the
// metadata). The caller must not modify it.
func (n *Net) Model() *Model { return n.model }

// Forward runs OpenCV on one standardised input of InH×InW values (see
// Preprocess) and writes the Rows×(Cells+1) probabilities into out. It
// does not retain in or out.
func (n *Net) Forward(in, out []float32) error {
	a := n.model.Arch
	if len(in) != a.InH*a.InW || len(out) != a.Outputs() {
		return fmt.Errorf("cnn: forward with %d inputs and %d outputs, want %d and %d", len(in), len(out), a.InH*a.InW, a.Outputs())
	}
	dst, err := n.blob.DataPtrFloat32()
	if err != nil {
		return fmt.Errorf("cnn: input blob: %w", err)
	}
	copy(dst, in)
	n.net.SetInput(n.blob, inputName)
	res := n.net.Forward(outputName)
	defer res.Close()
	if res.Empty() || res.Type() != gocv.MatTypeCV32F || res.Total() != a.Outputs() {
		return fmt.Errorf("cnn: OpenCV returned %d values of type %v, want %d float32", res.Total(), res.Type(), a.Outputs())
	}
	p, err := res.DataPtrFloat32()
	if err != nil {
		return fmt.Errorf("cnn: output: %w", err)
	}
	copy(out, p)
	return nil
}

// Close frees the OpenCV network and buffers.
func (n *Net) Close() error {
	n.blob.Close()
	return n.net.Close()
}

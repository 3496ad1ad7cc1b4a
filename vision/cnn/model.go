package cnn

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
)

// Arch is the shape of a row-anchor network. The input is one grey channel
// of InH×InW pixels; each entry of Conv adds a block of a 3×3 convolution
// (padding 1, stride 1) with that many output channels, a ReLU and a 2×2
// max-pool; then come a dense layer of Hidden units with a ReLU and a dense
// layer of Rows×(Cells+1) logits, and a softmax over each row's Cells+1
// classes (class Cells means "no stripe on this row").
type Arch struct {
	InW, InH int
	Conv     []int
	Hidden   int
	Rows     int
	Cells    int
}

// DefaultArch is the architecture of the shipped model: about 54 000
// weights (210 KB).
func DefaultArch() Arch {
	return Arch{InW: 64, InH: 32, Conv: []int{8, 16, 16}, Hidden: 64, Rows: 8, Cells: 32}
}

// Classes is the number of classes per row: Cells column cells plus
// "absent".
func (a Arch) Classes() int { return a.Cells + 1 }

// Absent is the class index meaning "no stripe on this row".
func (a Arch) Absent() int { return a.Cells }

// Outputs is the number of network outputs, Rows×Classes.
func (a Arch) Outputs() int { return a.Rows * a.Classes() }

// flatLen is the length of the feature vector after the last pool.
func (a Arch) flatLen() int {
	s := 1 << len(a.Conv)
	return a.Conv[len(a.Conv)-1] * (a.InH / s) * (a.InW / s)
}

// Limits that keep a model small and its file sane.
const (
	maxSide   = 512
	maxChan   = 128
	maxHidden = 1024
	maxRows   = 128
	maxCells  = 256
	maxBlocks = 6
)

// ErrBadArch reports an architecture this package cannot build.
var ErrBadArch = errors.New("cnn: bad architecture")

// Check returns an error wrapping ErrBadArch if a cannot be built.
func (a Arch) Check() error {
	bad := func(f string, v ...any) error {
		return fmt.Errorf("%w: %s", ErrBadArch, fmt.Sprintf(f, v...))
	}
	if len(a.Conv) < 1 || len(a.Conv) > maxBlocks {
		return bad("%d convolution blocks, want 1..%d", len(a.Conv), maxBlocks)
	}
	s := 1 << len(a.Conv)
	if a.InW < s || a.InH < s || a.InW > maxSide || a.InH > maxSide || a.InW%s != 0 || a.InH%s != 0 {
		return bad("input %dx%d must be multiples of %d, at most %d", a.InW, a.InH, s, maxSide)
	}
	for i, c := range a.Conv {
		if c < 1 || c > maxChan {
			return bad("block %d has %d channels, want 1..%d", i, c, maxChan)
		}
	}
	if a.Hidden < 1 || a.Hidden > maxHidden {
		return bad("hidden %d, want 1..%d", a.Hidden, maxHidden)
	}
	if a.Rows < 2 || a.Rows > maxRows || a.Rows > a.InH {
		return bad("rows %d, want 2..%d and at most the input height", a.Rows, maxRows)
	}
	if a.Cells < 2 || a.Cells > maxCells || a.Cells > a.InW {
		return bad("cells %d, want 2..%d and at most the input width", a.Cells, maxCells)
	}
	return nil
}

func (a Arch) String() string {
	conv := make([]string, len(a.Conv))
	for i, c := range a.Conv {
		conv[i] = strconv.Itoa(c)
	}
	return fmt.Sprintf("in=%dx%d conv=%s hidden=%d rows=%d cells=%d", a.InW, a.InH, strings.Join(conv, ","), a.Hidden, a.Rows, a.Cells)
}

// Tensor is a named float32 parameter with its ONNX shape.
type Tensor struct {
	Name string
	Dims []int
	Data []float32
}

// Model is a network's architecture and weights. Convolution weights are
// laid out [out][in][3][3] and dense weights [out][in], as ONNX's Conv and
// Gemm (transB=1) read them.
type Model struct {
	Arch Arch
	// ConvW[i], ConvB[i]: block i's kernel and bias.
	ConvW, ConvB []Tensor
	// FC1 maps the flattened features to Hidden units, FC2 to the logits.
	FC1W, FC1B, FC2W, FC2B Tensor
	// Notes are free-form key/value lines written into the ONNX metadata
	// (how the model was trained, its validation accuracy...).
	Notes map[string]string
}

// NewModel makes a model with He-initialised weights (normal, variance
// 2/fan-in; He et al. 2015) and zero biases, drawn from rng.
func NewModel(a Arch, rng *rand.Rand) (*Model, error) {
	if err := a.Check(); err != nil {
		return nil, err
	}
	m := &Model{Arch: a, Notes: map[string]string{}}
	he := func(t *Tensor, fanIn int) {
		sd := math.Sqrt(2 / float64(fanIn))
		for i := range t.Data {
			t.Data[i] = float32(rng.NormFloat64() * sd)
		}
	}
	in := 1
	for i, c := range a.Conv {
		w := newTensor(fmt.Sprintf("conv%d.w", i), c, in, 3, 3)
		he(&w, in*9)
		m.ConvW = append(m.ConvW, w)
		m.ConvB = append(m.ConvB, newTensor(fmt.Sprintf("conv%d.b", i), c))
		in = c
	}
	m.FC1W = newTensor("fc1.w", a.Hidden, a.flatLen())
	he(&m.FC1W, a.flatLen())
	m.FC1B = newTensor("fc1.b", a.Hidden)
	m.FC2W = newTensor("fc2.w", a.Outputs(), a.Hidden)
	he(&m.FC2W, a.Hidden)
	m.FC2B = newTensor("fc2.b", a.Outputs())
	return m, nil
}

func newTensor(name string, dims ...int) Tensor {
	n := 1
	for _, d := range dims {
		n *= d
	}
	return Tensor{Name: name, Dims: dims, Data: make([]float32, n)}
}

// params lists every weight tensor in a fixed order (the order of the
// ONNX initialisers).
func (m *Model) params() []*Tensor {
	var p []*Tensor
	for i := range m.ConvW {
		p = append(p, &m.ConvW[i], &m.ConvB[i])
	}
	return append(p, &m.FC1W, &m.FC1B, &m.FC2W, &m.FC2B)
}

// NumParams is the number of weights.
func (m *Model) NumParams() int {
	n := 0
	for _, t := range m.params() {
		n += len(t.Data)
	}
	return n
}

// clone copies the weights (Notes are shared).
func (m *Model) clone() *Model {
	c := *m
	cp := func(t Tensor) Tensor {
		t.Data = append([]float32(nil), t.Data...)
		t.Dims = append([]int(nil), t.Dims...)
		return t
	}
	c.ConvW = nil
	c.ConvB = nil
	for i := range m.ConvW {
		c.ConvW = append(c.ConvW, cp(m.ConvW[i]))
		c.ConvB = append(c.ConvB, cp(m.ConvB[i]))
	}
	c.FC1W, c.FC1B, c.FC2W, c.FC2B = cp(m.FC1W), cp(m.FC1B), cp(m.FC2W), cp(m.FC2B)
	return &c
}

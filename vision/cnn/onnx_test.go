package cnn

import (
	"bytes"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
)

func randomModel(t testing.TB, a Arch, seed uint64) *Model {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 7))
	m, err := NewModel(a, rng)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range m.params() {
		for i := range p.Data {
			p.Data[i] += float32(rng.NormFloat64() * 0.05)
		}
	}
	m.Notes["trained"] = "not trained: random weights for a test"
	return m
}

func randomInput(a Arch, rng *rand.Rand) []float32 {
	in := make([]float32, a.InW*a.InH)
	for i := range in {
		in[i] = float32(rng.NormFloat64())
	}
	return in
}

var testArchs = map[string]Arch{
	"default": DefaultArch(),
	"small":   {InW: 16, InH: 8, Conv: []int{4, 3}, Hidden: 6, Rows: 3, Cells: 5},
	"wide":    {InW: 128, InH: 64, Conv: []int{8, 16, 16, 16}, Hidden: 32, Rows: 16, Cells: 64},
}

// TestOpenCVMatchesGo is the check against an outside reference
// implementation: OpenCV 4.6's DNN module, reading the ONNX file this
// package writes, must give the same probabilities as the Go forward pass
// of the same weights, within 1e-4.
func TestOpenCVMatchesGo(t *testing.T) {
	for name, a := range testArchs {
		t.Run(name, func(t *testing.T) {
			m := randomModel(t, a, 3)
			b, err := m.MarshalONNX()
			if err != nil {
				t.Fatal(err)
			}
			net, err := Load(b)
			if err != nil {
				t.Fatal(err)
			}
			defer net.Close()
			rng := rand.New(rand.NewPCG(4, 5))
			out := make([]float32, a.Outputs())
			worst := 0.0
			for k := 0; k < 5; k++ {
				in := randomInput(a, rng)
				want := m.Predict(in)
				if err := net.Forward(in, out); err != nil {
					t.Fatal(err)
				}
				for i := range want {
					worst = math.Max(worst, math.Abs(float64(out[i]-want[i])))
				}
			}
			t.Logf("largest difference %.2g", worst)
			if worst > 1e-4 {
				t.Errorf("OpenCV and Go differ by %g, want ≤ 1e-4", worst)
			}
		})
	}
}

func TestRoundTrip(t *testing.T) {
	m := randomModel(t, testArchs["small"], 9)
	b, err := m.MarshalONNX()
	if err != nil {
		t.Fatal(err)
	}
	got, err := UnmarshalONNX(b)
	if err != nil {
		t.Fatal(err)
	}
	b2, _ := got.MarshalONNX()
	if !bytes.Equal(b, b2) {
		t.Error("re-encoding a decoded model changed the bytes")
	}
	if got.Notes["trained"] != m.Notes["trained"] || got.Arch.String() != m.Arch.String() {
		t.Errorf("metadata lost: %v %v", got.Notes, got.Arch)
	}
}

// TestONNXChecker runs the ONNX project's own checker (Debian's
// python3-onnx, installed by scripts/setup.sh) on an exported file.
func TestONNXChecker(t *testing.T) {
	// Debian's interpreter, not whichever python3 comes first in PATH.
	py := "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import onnx").Run(); err != nil {
		t.Skip("SKIPPED LOUDLY: python3-onnx is not installed (scripts/setup.sh installs it); the ONNX checker did not run")
	}
	for name, a := range testArchs {
		t.Run(name, func(t *testing.T) {
			b, err := randomModel(t, a, 1).MarshalONNX()
			if err != nil {
				t.Fatal(err)
			}
			p := filepath.Join(t.TempDir(), "m.onnx")
			if err := os.WriteFile(p, b, 0o644); err != nil {
				t.Fatal(err)
			}
			script := `import onnx, sys
m = onnx.load(sys.argv[1])
onnx.checker.check_model(m, full_check=True)
print(m.graph.output[0].type.tensor_type.shape)`
			out, err := exec.Command(py, "-c", script, p).CombinedOutput()
			if err != nil {
				t.Fatalf("onnx.checker refused the file: %v\n%s", err, out)
			}
		})
	}
}

// TestValidateRefuses feeds Load bytes that would abort the process inside
// OpenCV 4.6 (empty, truncated, random, a cut initialiser) and expects an
// error wrapping ErrInvalidModel. Load validates before OpenCV sees the
// bytes, so reaching the end of this test proves no abort.
func TestValidateRefuses(t *testing.T) {
	good, err := randomModel(t, testArchs["small"], 2).MarshalONNX()
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(11, 12))
	random := make([]byte, 4096)
	for i := range random {
		random[i] = byte(rng.Uint32())
	}
	// A copy whose first weight tensor has lost 4 bytes of data, with the
	// length prefixes fixed so that the protobuf still parses.
	cut := cutInitialiser(t, good)
	flipped := append([]byte(nil), good...)
	flipped[len(flipped)/2] ^= 0x40

	other := pb(nil).int(fModelIRVersion, 7).str(fModelProducer, "someone-else")
	tests := map[string][]byte{
		"empty":           {},
		"nil":             nil,
		"truncated half":  good[:len(good)/2],
		"truncated end":   good[:len(good)-1],
		"random":          random,
		"cut initialiser": cut,
		"bit flipped":     flipped,
		"other producer":  other,
		"text":            []byte("hello, not a model\n"),
	}
	for name, b := range tests {
		t.Run(name, func(t *testing.T) {
			n, err := Load(b)
			if err == nil {
				n.Close()
				t.Fatal("Load accepted bad bytes")
			}
			if !errors.Is(err, ErrInvalidModel) {
				t.Errorf("error %v does not wrap ErrInvalidModel", err)
			}
			t.Log(err)
		})
	}
	if err := Validate(good); err != nil {
		t.Errorf("good file refused: %v", err)
	}
}

// cutInitialiser rebuilds the model with conv0.w one value short, using
// the same encoder, so that only the tensor size is wrong.
func cutInitialiser(t *testing.T, good []byte) []byte {
	m, err := UnmarshalONNX(good)
	if err != nil {
		t.Fatal(err)
	}
	var g pb
	top, _ := fields(good)
	var out pb
	for _, f := range top {
		if f.num != fModelGraph {
			out = appendField(out, f)
			continue
		}
		gf, _ := fields(f.b)
		for _, e := range gf {
			if e.num == fGraphInit {
				tf, _ := fields(e.b)
				var tb pb
				for _, x := range tf {
					if x.num == fTensorRaw && len(x.b) == 4*len(m.ConvW[0].Data) {
						x.b = x.b[:len(x.b)-4]
					}
					tb = appendField(tb, x)
				}
				e.b = tb
			}
			g = appendField(g, e)
		}
		out = out.bytes(fModelGraph, g)
	}
	return out
}

func appendField(b pb, f field) pb {
	switch f.wire {
	case wireBytes:
		return b.bytes(f.num, f.b)
	case wireVarint:
		return b.tag(f.num, wireVarint).varint(f.v)
	}
	panic("unexpected wire type")
}

package cnn

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
)

// The ONNX file is the protobuf encoding of onnx.ModelProto (onnx.proto3
// in the ONNX repository), written by hand for the few messages and node
// types this package uses: Conv, Relu, MaxPool, Flatten, Gemm (transB=1,
// the only dense layout OpenCV 4.6 imports), Reshape and Softmax, at
// opset 13 and IR version 7.

const (
	onnxIRVersion = 7
	onnxOpset     = 13
	producerName  = "hewline"
	formatKey     = "hewline.format"
	formatValue   = "rowanchor/1"
	archKey       = "hewline.arch"
	inputName     = "image"
	outputName    = "probs"
)

// Field numbers of the ONNX messages used (onnx.proto3).
const (
	fModelIRVersion   = 1
	fModelProducer    = 2
	fModelProducerVer = 3
	fModelGraph       = 7
	fModelOpset       = 8
	fModelMetadata    = 14
	fOpsetVersion     = 2
	fKVKey            = 1
	fKVValue          = 2
	fGraphNode        = 1
	fGraphName        = 2
	fGraphInit        = 5
	fGraphInput       = 11
	fGraphOutput      = 12
	fNodeInput        = 1
	fNodeOutput       = 2
	fNodeName         = 3
	fNodeOp           = 4
	fNodeAttr         = 5
	fAttrName         = 1
	fAttrI            = 3
	fAttrInts         = 8
	fAttrType         = 20
	attrInt           = 2
	attrInts          = 7
	fTensorDims       = 1
	fTensorType       = 2
	fTensorName       = 8
	fTensorRaw        = 9
	tensorFloat       = 1
	tensorInt64       = 7
	fValueName        = 1
	fValueType        = 2
	fTypeTensor       = 1
	fTypeTensorElem   = 1
	fTypeTensorShape  = 2
	fShapeDim         = 1
	fDimValue         = 1
	wireVarint        = 0
	wireFixed64       = 1
	wireBytes         = 2
	wireFixed32       = 5
)

// pb appends protobuf wire-format fields.
type pb []byte

func (b pb) varint(v uint64) pb { return binary.AppendUvarint(b, v) }
func (b pb) tag(f, wire int) pb { return b.varint(uint64(f)<<3 | uint64(wire)) }
func (b pb) int(f int, v int64) pb {
	return b.tag(f, wireVarint).varint(uint64(v))
}
func (b pb) bytes(f int, v []byte) pb {
	return append(b.tag(f, wireBytes).varint(uint64(len(v))), v...)
}
func (b pb) str(f int, s string) pb { return b.bytes(f, []byte(s)) }

type attr struct {
	name string
	i    int64
	ints []int64
}

func (b pb) attr(a attr) pb {
	var m pb
	m = m.str(fAttrName, a.name)
	if a.ints != nil {
		for _, v := range a.ints {
			m = m.int(fAttrInts, v)
		}
		m = m.int(fAttrType, attrInts)
	} else {
		m = m.int(fAttrI, a.i)
		m = m.int(fAttrType, attrInt)
	}
	return b.bytes(fNodeAttr, m)
}

func node(op, name string, in []string, out string, attrs ...attr) []byte {
	var m pb
	for _, s := range in {
		m = m.str(fNodeInput, s)
	}
	m = m.str(fNodeOutput, out)
	m = m.str(fNodeName, name)
	m = m.str(fNodeOp, op)
	for _, a := range attrs {
		m = m.attr(a)
	}
	return m
}

func floatTensor(t Tensor) []byte {
	var m pb
	for _, d := range t.Dims {
		m = m.int(fTensorDims, int64(d))
	}
	m = m.int(fTensorType, tensorFloat)
	m = m.str(fTensorName, t.Name)
	raw := make([]byte, 4*len(t.Data))
	for i, v := range t.Data {
		binary.LittleEndian.PutUint32(raw[4*i:], math.Float32bits(v))
	}
	return m.bytes(fTensorRaw, raw)
}

func int64Tensor(name string, v []int64) []byte {
	var m pb
	m = m.int(fTensorDims, int64(len(v)))
	m = m.int(fTensorType, tensorInt64)
	m = m.str(fTensorName, name)
	raw := make([]byte, 8*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint64(raw[8*i:], uint64(x))
	}
	return m.bytes(fTensorRaw, raw)
}

func valueInfo(name string, dims ...int) []byte {
	var shape pb
	for _, d := range dims {
		shape = shape.bytes(fShapeDim, pb(nil).int(fDimValue, int64(d)))
	}
	tt := pb(nil).int(fTypeTensorElem, tensorFloat).bytes(fTypeTensorShape, shape)
	typ := pb(nil).bytes(fTypeTensor, tt)
	return pb(nil).str(fValueName, name).bytes(fValueType, typ)
}

// MarshalONNX encodes m as an ONNX model: input "image" [1,1,InH,InW]
// (standardised grey, see Preprocess), output "probs" [Rows, Cells+1]
// (per-row softmax). The encoding is deterministic.
func (m *Model) MarshalONNX() ([]byte, error) {
	a := m.Arch
	if err := a.Check(); err != nil {
		return nil, err
	}
	if err := m.checkShapes(); err != nil {
		return nil, err
	}
	var g pb
	x := inputName
	for i := range a.Conv {
		c, r, p := fmt.Sprintf("c%d", i), fmt.Sprintf("r%d", i), fmt.Sprintf("p%d", i)
		g = g.bytes(fGraphNode, node("Conv", "conv"+strconv.Itoa(i), []string{x, m.ConvW[i].Name, m.ConvB[i].Name}, c,
			attr{name: "kernel_shape", ints: []int64{3, 3}}, attr{name: "pads", ints: []int64{1, 1, 1, 1}}, attr{name: "strides", ints: []int64{1, 1}}))
		g = g.bytes(fGraphNode, node("Relu", "relu"+strconv.Itoa(i), []string{c}, r))
		g = g.bytes(fGraphNode, node("MaxPool", "pool"+strconv.Itoa(i), []string{r}, p,
			attr{name: "kernel_shape", ints: []int64{2, 2}}, attr{name: "strides", ints: []int64{2, 2}}))
		x = p
	}
	g = g.bytes(fGraphNode, node("Flatten", "flatten", []string{x}, "flat", attr{name: "axis", i: 1}))
	g = g.bytes(fGraphNode, node("Gemm", "fc1", []string{"flat", m.FC1W.Name, m.FC1B.Name}, "h", attr{name: "transB", i: 1}))
	g = g.bytes(fGraphNode, node("Relu", "relu_fc1", []string{"h"}, "hr"))
	g = g.bytes(fGraphNode, node("Gemm", "fc2", []string{"hr", m.FC2W.Name, m.FC2B.Name}, "logits", attr{name: "transB", i: 1}))
	g = g.bytes(fGraphNode, node("Reshape", "rows", []string{"logits", "rows.shape"}, "row_logits"))
	g = g.bytes(fGraphNode, node("Softmax", "softmax", []string{"row_logits"}, outputName, attr{name: "axis", i: 1}))
	g = g.str(fGraphName, "hewline_rowanchor")
	for _, t := range m.params() {
		g = g.bytes(fGraphInit, floatTensor(*t))
	}
	g = g.bytes(fGraphInit, int64Tensor("rows.shape", []int64{int64(a.Rows), int64(a.Classes())}))
	g = g.bytes(fGraphInput, valueInfo(inputName, 1, 1, a.InH, a.InW))
	g = g.bytes(fGraphOutput, valueInfo(outputName, a.Rows, a.Classes()))

	var b pb
	b = b.int(fModelIRVersion, onnxIRVersion)
	b = b.str(fModelProducer, producerName)
	b = b.str(fModelProducerVer, formatValue)
	b = b.bytes(fModelGraph, g)
	b = b.bytes(fModelOpset, pb(nil).int(fOpsetVersion, onnxOpset))
	meta := map[string]string{formatKey: formatValue, archKey: a.String()}
	for k, v := range m.Notes {
		if strings.HasPrefix(k, "hewline.") {
			return nil, fmt.Errorf("cnn: note key %q uses the reserved prefix hewline.", k)
		}
		meta[k] = v
	}
	keys := make([]string, 0, len(meta))
	for k := range meta {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		b = b.bytes(fModelMetadata, pb(nil).str(fKVKey, k).str(fKVValue, meta[k]))
	}
	return b, nil
}

func (m *Model) checkShapes() error {
	ref, err := NewModelZero(m.Arch)
	if err != nil {
		return err
	}
	got, want := m.params(), ref.params()
	if len(got) != len(want) {
		return fmt.Errorf("cnn: model has %d tensors, want %d", len(got), len(want))
	}
	for i := range want {
		if got[i].Name != want[i].Name || fmt.Sprint(got[i].Dims) != fmt.Sprint(want[i].Dims) || len(got[i].Data) != len(want[i].Data) {
			return fmt.Errorf("cnn: tensor %s %v with %d values, want %s %v", got[i].Name, got[i].Dims, len(got[i].Data), want[i].Name, want[i].Dims)
		}
	}
	return nil
}

// NewModelZero makes a model of architecture a with all weights zero.
func NewModelZero(a Arch) (*Model, error) {
	if err := a.Check(); err != nil {
		return nil, err
	}
	m := &Model{Arch: a, Notes: map[string]string{}}
	in := 1
	for i, c := range a.Conv {
		m.ConvW = append(m.ConvW, newTensor(fmt.Sprintf("conv%d.w", i), c, in, 3, 3))
		m.ConvB = append(m.ConvB, newTensor(fmt.Sprintf("conv%d.b", i), c))
		in = c
	}
	m.FC1W = newTensor("fc1.w", a.Hidden, a.flatLen())
	m.FC1B = newTensor("fc1.b", a.Hidden)
	m.FC2W = newTensor("fc2.w", a.Outputs(), a.Hidden)
	m.FC2B = newTensor("fc2.b", a.Outputs())
	return m, nil
}

// ErrInvalidModel reports bytes that are not a model written by this
// package: empty, truncated, corrupted, another producer's ONNX, or one
// whose weights do not fit its architecture. Errors from Validate and
// UnmarshalONNX wrap it.
var ErrInvalidModel = errors.New("cnn: invalid model file")

// field is one decoded protobuf field.
type field struct {
	num  int
	wire int
	v    uint64 // varint and fixed values
	b    []byte // length-delimited payload (aliases the input)
}

// fields splits a message into its fields, refusing truncated or
// malformed encodings.
func fields(b []byte) ([]field, error) {
	var out []field
	for len(b) > 0 {
		tag, n := binary.Uvarint(b)
		if n <= 0 {
			return nil, errors.New("truncated or malformed field tag")
		}
		b = b[n:]
		f := field{num: int(tag >> 3), wire: int(tag & 7)}
		if f.num <= 0 || tag>>3 > 1<<29 {
			return nil, fmt.Errorf("bad field number %d", tag>>3)
		}
		switch f.wire {
		case wireVarint:
			v, n := binary.Uvarint(b)
			if n <= 0 {
				return nil, errors.New("truncated varint")
			}
			f.v, b = v, b[n:]
		case wireFixed64:
			if len(b) < 8 {
				return nil, errors.New("truncated fixed64")
			}
			f.v, b = binary.LittleEndian.Uint64(b), b[8:]
		case wireFixed32:
			if len(b) < 4 {
				return nil, errors.New("truncated fixed32")
			}
			f.v, b = uint64(binary.LittleEndian.Uint32(b)), b[4:]
		case wireBytes:
			l, n := binary.Uvarint(b)
			if n <= 0 || l > uint64(len(b)-n) {
				return nil, errors.New("truncated length-delimited field")
			}
			f.b, b = b[n:n+int(l)], b[n+int(l):]
		default:
			return nil, fmt.Errorf("unsupported wire type %d", f.wire)
		}
		out = append(out, f)
	}
	return out, nil
}

// Validate checks, in Go and without OpenCV, that b is a complete model
// written by this package: every protobuf field well formed, the
// producer, format and architecture recognised, every weight tensor
// present with the right shape and finite values, and the whole file
// identical to what MarshalONNX writes for those weights. OpenCV 4.6
// aborts the process on malformed ONNX, so Load calls this first.
func Validate(b []byte) error {
	_, err := UnmarshalONNX(b)
	return err
}

// UnmarshalONNX decodes a model written by MarshalONNX. It refuses any
// other bytes with an error wrapping ErrInvalidModel. It does not retain b.
func UnmarshalONNX(b []byte) (*Model, error) {
	bad := func(f string, v ...any) error {
		return fmt.Errorf("%w: %s", ErrInvalidModel, fmt.Sprintf(f, v...))
	}
	if len(b) == 0 {
		return nil, bad("empty")
	}
	top, err := fields(b)
	if err != nil {
		return nil, bad("model: %v", err)
	}
	var producer string
	var graph []byte
	meta := map[string]string{}
	for _, f := range top {
		switch {
		case f.num == fModelProducer && f.wire == wireBytes:
			producer = string(f.b)
		case f.num == fModelGraph && f.wire == wireBytes:
			graph = f.b
		case f.num == fModelMetadata && f.wire == wireBytes:
			kv, err := fields(f.b)
			if err != nil {
				return nil, bad("metadata: %v", err)
			}
			var k, v string
			for _, e := range kv {
				if e.wire != wireBytes {
					return nil, bad("metadata: unexpected field %d", e.num)
				}
				switch e.num {
				case fKVKey:
					k = string(e.b)
				case fKVValue:
					v = string(e.b)
				}
			}
			meta[k] = v
		}
	}
	if producer != producerName || meta[formatKey] != formatValue {
		return nil, bad("not a hewline row-anchor model (producer %q, format %q)", producer, meta[formatKey])
	}
	a, err := parseArch(meta[archKey])
	if err != nil {
		return nil, bad("architecture %q: %v", meta[archKey], err)
	}
	m, err := NewModelZero(a)
	if err != nil {
		return nil, bad("%v", err)
	}
	for k, v := range meta {
		if !strings.HasPrefix(k, "hewline.") {
			m.Notes[k] = v
		}
	}
	if graph == nil {
		return nil, bad("no graph")
	}
	gf, err := fields(graph)
	if err != nil {
		return nil, bad("graph: %v", err)
	}
	want := map[string]*Tensor{}
	for _, t := range m.params() {
		want[t.Name] = t
	}
	seen := map[string]bool{}
	for _, f := range gf {
		if f.num != fGraphInit || f.wire != wireBytes {
			continue
		}
		tf, err := fields(f.b)
		if err != nil {
			return nil, bad("initialiser: %v", err)
		}
		var name string
		var dims []int
		var raw []byte
		var typ uint64
		for _, e := range tf {
			switch {
			case e.num == fTensorName && e.wire == wireBytes:
				name = string(e.b)
			case e.num == fTensorDims && e.wire == wireVarint:
				dims = append(dims, int(int64(e.v)))
			case e.num == fTensorRaw && e.wire == wireBytes:
				raw = e.b
			case e.num == fTensorType && e.wire == wireVarint:
				typ = e.v
			}
		}
		if name == "rows.shape" {
			continue // checked by the re-encoding below
		}
		t := want[name]
		if t == nil {
			return nil, bad("unexpected initialiser %q", name)
		}
		if seen[name] {
			return nil, bad("initialiser %q twice", name)
		}
		seen[name] = true
		if typ != tensorFloat || fmt.Sprint(dims) != fmt.Sprint(t.Dims) {
			return nil, bad("initialiser %s: type %d shape %v, want float %v", name, typ, dims, t.Dims)
		}
		if len(raw) != 4*len(t.Data) {
			return nil, bad("initialiser %s: %d bytes of data, want %d", name, len(raw), 4*len(t.Data))
		}
		for i := range t.Data {
			v := math.Float32frombits(binary.LittleEndian.Uint32(raw[4*i:]))
			if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
				return nil, bad("initialiser %s: value %d is not finite", name, i)
			}
			t.Data[i] = v
		}
	}
	for name := range want {
		if !seen[name] {
			return nil, bad("initialiser %s missing", name)
		}
	}
	again, err := m.MarshalONNX()
	if err != nil {
		return nil, bad("%v", err)
	}
	if !bytes.Equal(again, b) {
		i := 0
		for i < len(again) && i < len(b) && again[i] == b[i] {
			i++
		}
		return nil, bad("file differs from what this package writes, from byte %d (hand-edited or another version)", i)
	}
	return m, nil
}

// parseArch reads the form written by Arch.String.
func parseArch(s string) (Arch, error) {
	var a Arch
	var conv string
	if _, err := fmt.Sscanf(s, "in=%dx%d conv=%s hidden=%d rows=%d cells=%d", &a.InW, &a.InH, &conv, &a.Hidden, &a.Rows, &a.Cells); err != nil {
		return a, err
	}
	for _, c := range strings.Split(conv, ",") {
		n, err := strconv.Atoi(c)
		if err != nil {
			return a, err
		}
		a.Conv = append(a.Conv, n)
	}
	if a.String() != s {
		return a, errors.New("not in canonical form")
	}
	return a, a.Check()
}

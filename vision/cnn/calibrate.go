package cnn

import (
	"errors"
	"fmt"
	"math"
	"strconv"

	"github.com/hewline/hewline/vision"
)

// TemperatureNote is the Notes key under which a model records the
// softmax temperature folded into its last layer (ApplyTemperature).
const TemperatureNote = "calib.temperature"

// Temperature limits searched by FitTemperature.
const (
	minTemperature = 0.05
	maxTemperature = 20
)

// FitTemperature fits the softmax temperature T of m on held-out samples
// (temperature scaling, Guo, Pleiss, Sun, Weinberger, "On Calibration of
// Modern Neural Networks", ICML 2017): the T > 0 that maximises the
// likelihood of what the detector states under softmax(logits/T). The
// statement is each row's reading as Detector makes it (rowReading): the
// mass of the best cell and its two neighbours that the stripe is within
// one cell of it, or the absent class's probability that the row holds no
// stripe. Temperature does not change the best class, so the readings stay
// the same and only their stated confidence moves; T > 1 means the network
// was over-confident. (Fitting the cross-entropy of the exact cell instead,
// as Guo et al. do for classifiers, makes the three-cell mass that guidance
// uses under-confident.) The search is a grid over log T in [0.05, 20]
// refined by golden-section search. samples must not be the ones m was
// trained on. m is not changed and samples are not retained.
func FitTemperature(m *Model, samples []Sample) (float64, error) {
	a := m.Arch
	if len(samples) == 0 {
		return 0, errors.New("cnn: fit temperature: no samples")
	}
	k := a.Classes()
	wk := newWork(a)
	logits := make([]float32, 0, len(samples)*a.Outputs())
	labels := make([]uint8, 0, len(samples)*a.Rows)
	for i, s := range samples {
		if len(s.In) != a.InW*a.InH || len(s.Labels) != a.Rows {
			return 0, fmt.Errorf("cnn: fit temperature: sample %d has %d inputs and %d labels, want %d and %d", i, len(s.In), len(s.Labels), a.InW*a.InH, a.Rows)
		}
		logits = append(logits, m.logits(wk, s.In)...)
		labels = append(labels, s.Labels...)
	}
	p := make([]float32, k)
	nll := func(t float64) float64 {
		var sum float64
		for r, l := range labels {
			z := logits[r*k : (r+1)*k]
			mx := float64(z[argmax(z)])
			var e float64
			for c, v := range z {
				x := math.Exp((float64(v) - mx) / t)
				p[c] = float32(x)
				e += x
			}
			for c := range p {
				p[c] /= float32(e)
			}
			c, right := rowReading(a, p, int(l))
			c = math.Min(1-1e-9, math.Max(1e-9, c))
			if right {
				sum -= math.Log(c)
			} else {
				sum -= math.Log(1 - c)
			}
		}
		return sum / float64(len(labels))
	}
	lo, hi := math.Log(minTemperature), math.Log(maxTemperature)
	const grid = 40
	step := (hi - lo) / grid
	bi, bf := 0, math.Inf(1)
	for i := 0; i <= grid; i++ {
		if f := nll(math.Exp(lo + float64(i)*step)); f < bf {
			bi, bf = i, f
		}
	}
	lo, hi = math.Max(lo, lo+float64(bi-1)*step), math.Min(hi, lo+float64(bi+1)*step)
	g := (math.Sqrt(5) - 1) / 2
	x1, x2 := hi-g*(hi-lo), lo+g*(hi-lo)
	f1, f2 := nll(math.Exp(x1)), nll(math.Exp(x2))
	for hi-lo > 1e-4 {
		if f1 < f2 {
			hi, x2, f2 = x2, x1, f1
			x1 = hi - g*(hi-lo)
			f1 = nll(math.Exp(x1))
		} else {
			lo, x1, f1 = x1, x2, f2
			x2 = lo + g*(hi-lo)
			f2 = nll(math.Exp(x2))
		}
	}
	return math.Exp((lo + hi) / 2), nil
}

// Temperature returns the temperature recorded in m's notes by
// ApplyTemperature, 1 when there is none (or it does not parse).
func (m *Model) Temperature() float64 {
	if t, err := strconv.ParseFloat(m.Notes[TemperatureNote], 64); err == nil && t > 0 && !math.IsInf(t, 0) {
		return t
	}
	return 1
}

// ApplyTemperature divides the last dense layer's weights and biases by t,
// so that the network's softmax becomes softmax(logits/t): temperature
// scaling folded into the weights, with no node added to the ONNX graph
// (OpenCV runs it unchanged and the Go pass stays its reference). The
// total temperature (times any applied before) is recorded in Notes under
// TemperatureNote. t must lie in [0.05, 20].
func (m *Model) ApplyTemperature(t float64) error {
	if !(t >= minTemperature && t <= maxTemperature) {
		return fmt.Errorf("cnn: temperature %v outside [%v, %v]", t, minTemperature, maxTemperature)
	}
	total := m.Temperature() * t
	inv := float32(1 / t)
	for i := range m.FC2W.Data {
		m.FC2W.Data[i] *= inv
	}
	for i := range m.FC2B.Data {
		m.FC2B.Data[i] *= inv
	}
	if m.Notes == nil {
		m.Notes = map[string]string{}
	}
	m.Notes[TemperatureNote] = strconv.FormatFloat(total, 'g', 6, 64)
	return nil
}

// RowReliability is the reliability table of m's per-row confidence on
// samples, as Detector reads the rows (Row.Conf): a row reading "present"
// states the probability mass of its best cell and the two neighbours and
// is right when the label is a cell within one of the best; a row reading
// "absent" states the absent class's probability and is right when the
// label is absent. It returns the table over bins equal-width bins and the
// expected calibration error (vision.Reliability). samples are not
// retained.
func RowReliability(m *Model, samples []Sample, bins int) ([]vision.ReliabilityBin, float64, error) {
	a := m.Arch
	k := a.Classes()
	wk := newWork(a)
	conf := make([]float64, 0, len(samples)*a.Rows)
	ok := make([]bool, 0, len(samples)*a.Rows)
	for i, s := range samples {
		if len(s.In) != a.InW*a.InH || len(s.Labels) != a.Rows {
			return nil, 0, fmt.Errorf("cnn: reliability: sample %d has %d inputs and %d labels, want %d and %d", i, len(s.In), len(s.Labels), a.InW*a.InH, a.Rows)
		}
		p := m.forward(wk, s.In)
		for r := 0; r < a.Rows; r++ {
			c, right := rowReading(a, p[r*k:(r+1)*k], int(s.Labels[r]))
			conf = append(conf, math.Min(1, math.Max(0, c)))
			ok = append(ok, right)
		}
	}
	return vision.Reliability(conf, ok, bins)
}

// rowReading is one row's stated confidence (as Detector computes
// Row.Conf) and whether the reading is right for label l.
func rowReading(a Arch, p []float32, l int) (float64, bool) {
	am := argmax(p)
	if am == a.Absent() {
		return float64(p[am]), l == a.Absent()
	}
	var s float64
	for i := max(0, am-1); i <= min(a.Cells-1, am+1); i++ {
		s += float64(p[i])
	}
	return s, l != a.Absent() && abs(am-l) <= 1
}

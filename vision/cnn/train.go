package cnn

import (
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
)

// Sample is one training example: a standardised input of InH×InW values
// (see Preprocess) and one class per anchor row (a cell index, or
// Arch.Absent()).
type Sample struct {
	In     []float32
	Labels []uint8
}

// TrainConfig sets up Train. Zero fields take the defaults in brackets.
type TrainConfig struct {
	Epochs   int     // most passes over the training split [30]
	Batch    int     // samples per Adam step [32]
	LR       float64 // Adam step size [2e-3]
	Decay    float64 // the step size is multiplied by this after every epoch [0.9]
	Seed     uint64  // shuffling and the split [1]
	ValFrac  float64 // share of the data held out for validation [0.15]
	Patience int     // epochs without a better validation loss before stopping [4]
	// Mirror, when true, flips each training sample left to right (and
	// its cells with it) with probability ½ each time it is used: a free
	// doubling of the data, since a stripe seen in a mirror is still a
	// stripe.
	Mirror bool
	// Log, when not nil, gets one line per epoch (loss and accuracy).
	Log io.Writer
	// Step, when not nil, is called after every Adam step with the
	// number of samples seen so far in this epoch (for a progress bar).
	Step func(epoch, done, total int)
	// Stop, when not nil, is asked after every step; true ends training
	// (for Ctrl-C). Train then returns ErrStopped.
	Stop func() bool
}

// ErrStopped is returned when TrainConfig.Stop ended training.
var ErrStopped = errors.New("cnn: training stopped")

// NewRand returns the generator this package uses for seed (PCG).
func NewRand(seed uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, 0x77656967687473)) }

// EpochStats is the record of one epoch.
type EpochStats struct {
	Epoch     int
	TrainLoss float64
	Val       Score
}

// Score measures a model on a set of samples.
type Score struct {
	// Loss is the mean per-row cross-entropy.
	Loss float64
	// RowAcc is the share of rows whose most probable class is the label.
	RowAcc float64
	// RowNear is the share of rows where presence is right and, when the
	// stripe is there, the predicted cell is within one of the label.
	RowNear float64
}

// Adam hyper-parameters: the defaults published by Kingma & Ba, "Adam: A
// Method for Stochastic Optimization", ICLR 2015.
const (
	adamBeta1 = 0.9
	adamBeta2 = 0.999
	adamEps   = 1e-8
)

// ErrNoData reports a training set too small to split.
var ErrNoData = errors.New("cnn: too few samples to train")

// Train fits m to data with Adam on mini-batches, holding out a validation
// split, and stops early when the validation loss has not improved for
// Patience epochs. m ends with the weights of the best validation epoch.
// The run is deterministic for a given Seed and data order. Train does not
// retain data.
func Train(m *Model, data []Sample, cfg TrainConfig) ([]EpochStats, error) {
	if cfg.Epochs <= 0 {
		cfg.Epochs = 30
	}
	if cfg.Batch <= 0 {
		cfg.Batch = 32
	}
	if cfg.LR <= 0 {
		cfg.LR = 2e-3
	}
	if cfg.Seed == 0 {
		cfg.Seed = 1
	}
	if cfg.Decay <= 0 || cfg.Decay > 1 {
		cfg.Decay = 0.9
	}
	if cfg.ValFrac <= 0 || cfg.ValFrac >= 1 {
		cfg.ValFrac = 0.15
	}
	if cfg.Patience <= 0 {
		cfg.Patience = 4
	}
	a := m.Arch
	for i, s := range data {
		if len(s.In) != a.InW*a.InH || len(s.Labels) != a.Rows {
			return nil, fmt.Errorf("cnn: sample %d has %d inputs and %d labels, want %d and %d", i, len(s.In), len(s.Labels), a.InW*a.InH, a.Rows)
		}
		for _, l := range s.Labels {
			if int(l) >= a.Classes() {
				return nil, fmt.Errorf("cnn: sample %d has label %d, want < %d", i, l, a.Classes())
			}
		}
	}
	if cfg.Mirror && a.InW%a.Cells != 0 {
		return nil, fmt.Errorf("cnn: mirroring needs the input width %d to be a multiple of the cells %d", a.InW, a.Cells)
	}
	rng := rand.New(rand.NewPCG(cfg.Seed, 0x6865776c696e65))
	idx := rng.Perm(len(data))
	nVal := int(math.Round(float64(len(data)) * cfg.ValFrac))
	if nVal < 1 || len(data)-nVal < 1 {
		return nil, fmt.Errorf("%w: %d", ErrNoData, len(data))
	}
	val := make([]Sample, nVal)
	for i := range val {
		val[i] = data[idx[i]]
	}
	train := idx[nVal:]

	params := m.params()
	g, bg := newGrads(m), newGrads(m)
	mom, vel := newGrads(m), newGrads(m)
	wk := newWork(a)
	flipIn, flipLab := make([]float32, a.InW*a.InH), make([]uint8, a.Rows)
	best, bestLoss, since := m.clone(), math.Inf(1), 0
	var stats []EpochStats
	step := 0
	lr := cfg.LR
	for ep := 1; ep <= cfg.Epochs; ep++ {
		rng.Shuffle(len(train), func(i, j int) { train[i], train[j] = train[j], train[i] })
		var sum float64
		for b := 0; b < len(train); b += cfg.Batch {
			end := min(b+cfg.Batch, len(train))
			bg.zero()
			for _, k := range train[b:end] {
				in, lab := data[k].In, data[k].Labels
				if cfg.Mirror && rng.IntN(2) == 1 {
					mirror(a, in, lab, flipIn, flipLab)
					in, lab = flipIn, flipLab
				}
				m.forward(wk, in)
				sum += m.backward(wk, lab, bg)
			}
			n := float32(end - b)
			for i := range bg {
				for j := range bg[i] {
					g[i][j] = bg[i][j] / n
				}
			}
			step++
			adamStep(params, g, mom, vel, lr, step)
			if cfg.Step != nil {
				cfg.Step(ep, end, len(train))
			}
			if cfg.Stop != nil && cfg.Stop() {
				return stats, ErrStopped
			}
		}
		lr *= cfg.Decay
		st := EpochStats{Epoch: ep, TrainLoss: sum / float64(len(train)), Val: Evaluate(m, val)}
		stats = append(stats, st)
		if cfg.Log != nil {
			fmt.Fprintf(cfg.Log, "epoch %3d  train loss %.4f  val loss %.4f  val row acc %.4f  within 1 cell %.4f\n",
				ep, st.TrainLoss, st.Val.Loss, st.Val.RowAcc, st.Val.RowNear)
		}
		if math.IsNaN(st.TrainLoss) {
			return stats, errors.New("cnn: training diverged (loss is NaN); lower the step size")
		}
		if st.Val.Loss < bestLoss {
			best, bestLoss, since = m.clone(), st.Val.Loss, 0
		} else if since++; since >= cfg.Patience {
			if cfg.Log != nil {
				fmt.Fprintf(cfg.Log, "stopping early: no better validation loss for %d epochs\n", cfg.Patience)
			}
			break
		}
	}
	notes := m.Notes
	*m = *best
	m.Notes = notes
	return stats, nil
}

// mirror writes the left-right mirror image of a sample into in2, lab2.
func mirror(a Arch, in []float32, lab []uint8, in2 []float32, lab2 []uint8) {
	for y := 0; y < a.InH; y++ {
		row, out := in[y*a.InW:(y+1)*a.InW], in2[y*a.InW:(y+1)*a.InW]
		for x := range row {
			out[a.InW-1-x] = row[x]
		}
	}
	for r, l := range lab {
		if int(l) == a.Absent() {
			lab2[r] = l
		} else {
			lab2[r] = uint8(a.Cells - 1 - int(l))
		}
	}
}

// adamStep moves every parameter by one Adam update with bias correction.
func adamStep(params []*Tensor, g, mom, vel grads, lr float64, t int) {
	c1 := 1 - math.Pow(adamBeta1, float64(t))
	c2 := 1 - math.Pow(adamBeta2, float64(t))
	for i, p := range params {
		for j := range p.Data {
			gj := float64(g[i][j])
			mj := adamBeta1*float64(mom[i][j]) + (1-adamBeta1)*gj
			vj := adamBeta2*float64(vel[i][j]) + (1-adamBeta2)*gj*gj
			mom[i][j], vel[i][j] = float32(mj), float32(vj)
			p.Data[j] -= float32(lr * (mj / c1) / (math.Sqrt(vj/c2) + adamEps))
		}
	}
}

// Evaluate scores m on samples with the Go forward pass.
func Evaluate(m *Model, samples []Sample) Score {
	a := m.Arch
	wk := newWork(a)
	k := a.Classes()
	var s Score
	rows := 0
	for _, smp := range samples {
		p := m.forward(wk, smp.In)
		for r := 0; r < a.Rows; r++ {
			row := p[r*k : (r+1)*k]
			l := int(smp.Labels[r])
			s.Loss -= math.Log(math.Max(float64(row[l]), 1e-30))
			am := argmax(row)
			if am == l {
				s.RowAcc++
			}
			if (am == a.Absent()) == (l == a.Absent()) && (l == a.Absent() || abs(am-l) <= 1) {
				s.RowNear++
			}
			rows++
		}
	}
	if rows > 0 {
		s.Loss /= float64(rows)
		s.RowAcc /= float64(rows)
		s.RowNear /= float64(rows)
	}
	return s
}

func argmax(x []float32) int {
	bi := 0
	for i, v := range x {
		if v > x[bi] {
			bi = i
		}
	}
	return bi
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

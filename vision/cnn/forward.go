package cnn

import "fmt"

// work holds one sample's activations, so that a forward pass can be
// followed by a backward pass without allocating. One work per goroutine.
type work struct {
	a Arch
	// per block i: input size (ch, h, w), patches, conv output after
	// ReLU, pooled output and the pool's argmax indices.
	inC, inH, inW []int
	col           [][]float32
	act           [][]float32
	pool          [][]float32
	arg           [][]int32
	hid           []float32 // FC1 output after ReLU
	out           []float32 // logits, then probabilities
	// gradient scratch
	dact, dpool, dcol [][]float32
	dflat, dhid       []float32
}

func newWork(a Arch) *work {
	wk := &work{a: a}
	c, h, w := 1, a.InH, a.InW
	for _, co := range a.Conv {
		wk.inC = append(wk.inC, c)
		wk.inH = append(wk.inH, h)
		wk.inW = append(wk.inW, w)
		wk.col = append(wk.col, make([]float32, c*9*h*w))
		wk.dcol = append(wk.dcol, make([]float32, c*9*h*w))
		wk.act = append(wk.act, make([]float32, co*h*w))
		wk.dact = append(wk.dact, make([]float32, co*h*w))
		wk.pool = append(wk.pool, make([]float32, co*h*w/4))
		wk.dpool = append(wk.dpool, make([]float32, co*h*w/4))
		wk.arg = append(wk.arg, make([]int32, co*h*w/4))
		c, h, w = co, h/2, w/2
	}
	wk.dflat = make([]float32, a.flatLen())
	wk.hid = make([]float32, a.Hidden)
	wk.dhid = make([]float32, a.Hidden)
	wk.out = make([]float32, a.Outputs())
	return wk
}

// forward runs the network on one input of InH×InW values and leaves the
// per-row probabilities in wk.out (Rows×Classes). It does not retain in.
func (m *Model) forward(wk *work, in []float32) []float32 {
	m.logits(wk, in)
	softmaxRows(wk.out, m.Arch.Classes())
	return wk.out
}

// logits runs the network up to the last dense layer and leaves the
// Rows×Classes logits in wk.out (before the per-row softmax).
func (m *Model) logits(wk *work, in []float32) []float32 {
	a := m.Arch
	x := in
	for i := range a.Conv {
		c, h, w := wk.inC[i], wk.inH[i], wk.inW[i]
		im2col(x, c, h, w, wk.col[i])
		convForward(m.ConvW[i].Data, m.ConvB[i].Data, c, a.Conv[i], h*w, wk.col[i], wk.act[i])
		relu(wk.act[i])
		maxPool(wk.act[i], a.Conv[i], h, w, wk.pool[i], wk.arg[i])
		x = wk.pool[i]
	}
	denseForward(m.FC1W.Data, m.FC1B.Data, x, wk.hid)
	relu(wk.hid)
	denseForward(m.FC2W.Data, m.FC2B.Data, wk.hid, wk.out)
	return wk.out
}

// grads holds one gradient slice per parameter tensor, in params order.
type grads [][]float32

func newGrads(m *Model) grads {
	var g grads
	for _, t := range m.params() {
		g = append(g, make([]float32, len(t.Data)))
	}
	return g
}

func (g grads) zero() {
	for _, s := range g {
		clear(s)
	}
}

func (g grads) add(o grads) {
	for i := range g {
		for j, v := range o[i] {
			g[i][j] += v
		}
	}
}

// backward adds to g the gradient of the row-mean cross-entropy of the
// sample last run through forward, and returns that loss. labels has one
// class per row.
func (m *Model) backward(wk *work, labels []uint8, g grads) float64 {
	a := m.Arch
	if len(labels) != a.Rows {
		panic(fmt.Sprintf("cnn: %d labels for %d rows", len(labels), a.Rows))
	}
	nb := len(a.Conv)
	gi := func(k int) []float32 { return g[k] } // params order: conv w,b pairs, fc1 w,b, fc2 w,b
	loss := crossEntropy(wk.out, a.Classes(), labels)
	dlogit := wk.out
	denseBackward(m.FC2W.Data, wk.hid, dlogit, gi(2*nb+2), gi(2*nb+3), wk.dhid)
	reluBackward(wk.hid, wk.dhid)
	flat := wk.pool[nb-1]
	denseBackward(m.FC1W.Data, flat, wk.dhid, gi(2*nb), gi(2*nb+1), wk.dflat)
	dx := wk.dflat
	for i := nb - 1; i >= 0; i-- {
		c, h, w := wk.inC[i], wk.inH[i], wk.inW[i]
		clear(wk.dact[i])
		maxPoolBackward(dx, wk.arg[i], wk.dact[i])
		reluBackward(wk.act[i], wk.dact[i])
		var dcol []float32
		if i > 0 {
			dcol = wk.dcol[i]
		}
		convBackward(m.ConvW[i].Data, c, a.Conv[i], h*w, wk.col[i], wk.dact[i], gi(2*i), gi(2*i+1), dcol)
		if i > 0 {
			prev := wk.dpool[i-1]
			clear(prev)
			col2im(dcol, c, h, w, prev)
			dx = prev
		}
	}
	return loss
}

// Predict runs the Go forward pass on one standardised input of InH×InW
// values and returns a new slice of Rows×Classes probabilities. It is the
// reference the OpenCV path is checked against; Detector uses OpenCV.
func (m *Model) Predict(in []float32) []float32 {
	if len(in) != m.Arch.InH*m.Arch.InW {
		panic(fmt.Sprintf("cnn: Predict got %d values, want %d", len(in), m.Arch.InH*m.Arch.InW))
	}
	return append([]float32(nil), m.forward(newWork(m.Arch), in)...)
}

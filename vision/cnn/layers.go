package cnn

import (
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas32"
)

// This file holds the forward and backward passes of the few layers the
// network uses, for one sample at a time. Activations are laid out
// [channel][row][column], as ONNX's NCHW with N = 1.

// im2col writes the 3×3, padding-1 patches of in (c channels of h×w) into
// col, laid out [c*9][h*w].
func im2col(in []float32, c, h, w int, col []float32) {
	hw := h * w
	for ch := 0; ch < c; ch++ {
		src := in[ch*hw : (ch+1)*hw]
		for ky := 0; ky < 3; ky++ {
			for kx := 0; kx < 3; kx++ {
				dst := col[(ch*9+ky*3+kx)*hw : (ch*9+ky*3+kx+1)*hw]
				for y := 0; y < h; y++ {
					sy := y + ky - 1
					row := dst[y*w : (y+1)*w]
					if sy < 0 || sy >= h {
						clear(row)
						continue
					}
					srow := src[sy*w : (sy+1)*w]
					for x := 0; x < w; x++ {
						sx := x + kx - 1
						if sx < 0 || sx >= w {
							row[x] = 0
						} else {
							row[x] = srow[sx]
						}
					}
				}
			}
		}
	}
}

// col2im adds the patch gradients in col (laid out as im2col writes them)
// back into din.
func col2im(col []float32, c, h, w int, din []float32) {
	hw := h * w
	for ch := 0; ch < c; ch++ {
		dst := din[ch*hw : (ch+1)*hw]
		for ky := 0; ky < 3; ky++ {
			for kx := 0; kx < 3; kx++ {
				src := col[(ch*9+ky*3+kx)*hw : (ch*9+ky*3+kx+1)*hw]
				for y := 0; y < h; y++ {
					sy := y + ky - 1
					if sy < 0 || sy >= h {
						continue
					}
					drow := dst[sy*w : (sy+1)*w]
					srow := src[y*w : (y+1)*w]
					for x := 0; x < w; x++ {
						sx := x + kx - 1
						if sx >= 0 && sx < w {
							drow[sx] += srow[x]
						}
					}
				}
			}
		}
	}
}

func gen(rows, cols int, d []float32) blas32.General {
	return blas32.General{Rows: rows, Cols: cols, Stride: cols, Data: d}
}

// convForward computes out = W·col + b, out laid out [cout][h*w].
func convForward(w, b []float32, cin, cout, hw int, col, out []float32) {
	blas32.Gemm(blas.NoTrans, blas.NoTrans, 1, gen(cout, cin*9, w), gen(cin*9, hw, col), 0, gen(cout, hw, out))
	for o := 0; o < cout; o++ {
		bo := b[o]
		row := out[o*hw : (o+1)*hw]
		for i := range row {
			row[i] += bo
		}
	}
}

// convBackward adds the weight and bias gradients of one sample to dw, db
// and, when dcol is not nil, writes the gradient of the patches into dcol.
func convBackward(w []float32, cin, cout, hw int, col, dout, dw, db, dcol []float32) {
	blas32.Gemm(blas.NoTrans, blas.Trans, 1, gen(cout, hw, dout), gen(cin*9, hw, col), 1, gen(cout, cin*9, dw))
	for o := 0; o < cout; o++ {
		var s float32
		for _, v := range dout[o*hw : (o+1)*hw] {
			s += v
		}
		db[o] += s
	}
	if dcol != nil {
		blas32.Gemm(blas.Trans, blas.NoTrans, 1, gen(cout, cin*9, w), gen(cout, hw, dout), 0, gen(cin*9, hw, dcol))
	}
}

// relu clamps x at zero in place.
func relu(x []float32) {
	for i, v := range x {
		if v < 0 {
			x[i] = 0
		}
	}
}

// reluBackward zeroes the gradient where the ReLU's output y was zero.
func reluBackward(y, dy []float32) {
	for i, v := range y {
		if v <= 0 {
			dy[i] = 0
		}
	}
}

// maxPool halves each side of in (c channels of h×w, h and w even) into
// out, recording in arg the index into in of each maximum.
func maxPool(in []float32, c, h, w int, out []float32, arg []int32) {
	oh, ow := h/2, w/2
	for ch := 0; ch < c; ch++ {
		base := ch * h * w
		for y := 0; y < oh; y++ {
			for x := 0; x < ow; x++ {
				i0 := base + 2*y*w + 2*x
				best, bi := in[i0], i0
				for _, i := range [3]int{i0 + 1, i0 + w, i0 + w + 1} {
					if in[i] > best {
						best, bi = in[i], i
					}
				}
				o := ch*oh*ow + y*ow + x
				out[o] = best
				arg[o] = int32(bi)
			}
		}
	}
}

// maxPoolBackward routes dout to the maxima recorded in arg; din must be
// zeroed by the caller.
func maxPoolBackward(dout []float32, arg []int32, din []float32) {
	for o, g := range dout {
		din[arg[o]] += g
	}
}

// denseForward computes y = W·x + b with W laid out [out][in].
func denseForward(w, b, x, y []float32) {
	copy(y, b)
	blas32.Gemv(blas.NoTrans, 1, gen(len(y), len(x), w), blas32.Vector{N: len(x), Inc: 1, Data: x}, 1, blas32.Vector{N: len(y), Inc: 1, Data: y})
}

// denseBackward adds dW += dy·xᵀ, db += dy and, when dx is not nil, writes
// dx = Wᵀ·dy.
func denseBackward(w, x, dy, dw, db, dx []float32) {
	blas32.Ger(1, blas32.Vector{N: len(dy), Inc: 1, Data: dy}, blas32.Vector{N: len(x), Inc: 1, Data: x}, gen(len(dy), len(x), dw))
	for i, v := range dy {
		db[i] += v
	}
	if dx != nil {
		blas32.Gemv(blas.Trans, 1, gen(len(dy), len(dx), w), blas32.Vector{N: len(dy), Inc: 1, Data: dy}, 0, blas32.Vector{N: len(dx), Inc: 1, Data: dx})
	}
}

// softmaxRows turns each run of k logits into probabilities, in place.
// The maximum is subtracted first so that exp never overflows.
func softmaxRows(z []float32, k int) {
	for r := 0; r+k <= len(z); r += k {
		row := z[r : r+k]
		m := row[0]
		for _, v := range row {
			if v > m {
				m = v
			}
		}
		var s float64
		for i, v := range row {
			e := math.Exp(float64(v - m))
			row[i] = float32(e)
			s += e
		}
		for i := range row {
			row[i] = float32(float64(row[i]) / s)
		}
	}
}

// crossEntropy returns the mean over rows of −log p[label] for the
// probabilities p (rows of k) and turns p into the gradient of that mean
// with respect to the logits, (p − onehot)/rows, in place.
func crossEntropy(p []float32, k int, labels []uint8) float64 {
	rows := len(p) / k
	var loss float64
	for r := 0; r < rows; r++ {
		row := p[r*k : (r+1)*k]
		l := int(labels[r])
		loss -= math.Log(math.Max(float64(row[l]), 1e-30))
		row[l] -= 1
		for i := range row {
			row[i] /= float32(rows)
		}
	}
	return loss / float64(rows)
}

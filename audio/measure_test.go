package audio

import (
	"math"
	"math/cmplx"
	"testing"
	"time"

	"github.com/hewline/hewline/audio/audiotest"
	"gonum.org/v1/gonum/dsp/fourier"
)

// Measurements used by the tests. Spectra come from gonum's FFT
// (gonum.org/v1/gonum/dsp/fourier), a general-purpose reference library;
// sox cross-checks them in sox_test.go.

const testRate = 48000

// newTestSynth makes a synth at testRate or fails the test.
func newTestSynth(t testing.TB, m Mapping, a AlarmPattern) *Synth {
	t.Helper()
	s, err := NewSynth(testRate, m, a)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// render renders d of audio and returns the two channels.
func render(s *Synth, d time.Duration) (l, r []float64) {
	buf := make([]float32, 2*int(d.Seconds()*float64(s.Rate())))
	s.Fill(buf)
	return audiotest.Deinterleave(buf)
}

// spectrum returns the power of each FFT bin of x under a Hann window, and
// the bin width in Hz.
func spectrum(x []float64, rate int) (power []float64, binHz float64) {
	n := len(x)
	w := make([]float64, n)
	for i, v := range x {
		w[i] = v * (0.5 - 0.5*math.Cos(2*math.Pi*float64(i)/float64(n)))
	}
	c := fourier.NewFFT(n).Coefficients(nil, w)
	power = make([]float64, len(c))
	for i, v := range c {
		a := cmplx.Abs(v)
		power[i] = a * a
	}
	return power, float64(rate) / float64(n)
}

// peakHz is the frequency of the strongest spectral line of x, refined by
// fitting a parabola to the log magnitudes around the peak bin.
func peakHz(x []float64, rate int) float64 {
	p, bin := spectrum(x, rate)
	k := 1
	for i := 1; i < len(p)-1; i++ {
		if p[i] > p[k] {
			k = i
		}
	}
	a, b, c := math.Log(p[k-1]+1e-300), math.Log(p[k]+1e-300), math.Log(p[k+1]+1e-300)
	d := 0.5 * (a - c) / (a - 2*b + c)
	return (float64(k) + d) * bin
}

// bandEnergy is the share of x's spectral energy between lo and hi Hz.
func bandEnergy(x []float64, rate int, lo, hi float64) float64 {
	p, bin := spectrum(x, rate)
	in, all := 0.0, 0.0
	for i, v := range p {
		f := float64(i) * bin
		all += v
		if f >= lo && f <= hi {
			in += v
		}
	}
	return in / all
}

// rmsDB is x's RMS level in dB (re 1.0).
func rmsDB(x []float64) float64 { return 20 * math.Log10(audiotest.RMS(x)) }

// peakDBOfSine is the peak level of a steady sine in dBFS from its RMS.
func peakDBOfSine(x []float64) float64 { return rmsDB(x) + 20*math.Log10(math.Sqrt2) }

// envelope demodulates x at f Hz (I/Q mixing, then a moving average of one
// period centred on each sample) and returns the amplitude of the f
// component at every sample. The symmetric average keeps the times of the
// half-amplitude points of symmetric ramps.
func envelope(x []float64, rate int, f float64) []float64 {
	n := len(x)
	ci := make([]float64, n+1)
	cq := make([]float64, n+1)
	for i, v := range x {
		ph := 2 * math.Pi * f * float64(i) / float64(rate)
		ci[i+1] = ci[i] + v*math.Cos(ph)
		cq[i+1] = cq[i] + v*math.Sin(ph)
	}
	w := int(math.Round(float64(rate) / f))
	env := make([]float64, n)
	for i := range env {
		lo, hi := i-w/2, i-w/2+w
		if lo < 0 || hi > n {
			continue
		}
		a := (ci[hi] - ci[lo]) / float64(w)
		b := (cq[hi] - cq[lo]) / float64(w)
		env[i] = 2 * math.Hypot(a, b)
	}
	return env
}

// edges returns the times (s) where env rises through and falls through
// thr, interpolated between samples.
func edges(env []float64, rate int, thr float64) (rises, falls []float64) {
	for i := 1; i < len(env); i++ {
		a, b := env[i-1], env[i]
		t := (float64(i-1) + (thr-a)/(b-a)) / float64(rate)
		switch {
		case a < thr && b >= thr:
			rises = append(rises, t)
		case a >= thr && b < thr:
			falls = append(falls, t)
		}
	}
	return rises, falls
}

func maxAbs(x []float64) float64 {
	m := 0.0
	for _, v := range x {
		m = math.Max(m, math.Abs(v))
	}
	return m
}

func ms(s float64) time.Duration { return time.Duration(s * float64(time.Second)) }

package guidance

import "math"

// KalmanCV is a one-channel constant-velocity Kalman filter: the state is a
// position (an offset in pixels, or a heading in degrees) and its rate of
// change per second, and each measurement observes the position only.
//
// The model is the discrete white-noise acceleration model (Bar-Shalom et
// al.): over an interval T,
//
//	F = [[1, T], [0, 1]]    H = [1, 0]
//	Q = σa²·[[T⁴/4, T³/2], [T³/2, T²]]    R = σv²
//
// where σa is AccelSigma (position units per second²) and σv is MeasSigma
// (position units). T comes from the frame timestamps, so variable frame
// intervals and dropped frames are handled by a longer prediction.
//
// The zero value is not initialised; call Init with the first measurement.
// KalmanCV is a plain value: copying it copies the filter.
type KalmanCV struct {
	// AccelSigma is σa, the standard deviation of the unmodelled
	// acceleration, in position units per second².
	AccelSigma float64
	// MeasSigma is σv, the standard deviation of one measurement, in
	// position units.
	MeasSigma float64

	// X is the state: X[0] position, X[1] rate (units per second).
	X [2]float64
	// P is the state covariance.
	P [2][2]float64
	// Ready reports whether Init has been called.
	Ready bool
}

// NewKalmanCV returns an uninitialised filter with the given noise levels.
func NewKalmanCV(accelSigma, measSigma float64) KalmanCV {
	return KalmanCV{AccelSigma: accelSigma, MeasSigma: measSigma}
}

// Init starts the filter at position z with rate 0. The position variance
// is the measurement variance; the rate variance is rateSigma².
func (k *KalmanCV) Init(z, rateSigma float64) {
	k.X = [2]float64{z, 0}
	k.P = [2][2]float64{{k.MeasSigma * k.MeasSigma, 0}, {0, rateSigma * rateSigma}}
	k.Ready = true
}

// Predicted returns the state and covariance predicted dt seconds ahead
// without changing the filter. A negative dt is treated as 0.
func (k *KalmanCV) Predicted(dt float64) (x [2]float64, p [2][2]float64) {
	if dt < 0 {
		dt = 0
	}
	x = [2]float64{k.X[0] + dt*k.X[1], k.X[1]}
	// P' = F P Fᵀ + Q, written out for the 2×2 case.
	p00, p01, p10, p11 := k.P[0][0], k.P[0][1], k.P[1][0], k.P[1][1]
	q := k.AccelSigma * k.AccelSigma
	dt2 := dt * dt
	p[0][0] = p00 + dt*(p10+p01) + dt2*p11 + q*dt2*dt2/4
	p[0][1] = p01 + dt*p11 + q*dt2*dt/2
	p[1][0] = p10 + dt*p11 + q*dt2*dt/2
	p[1][1] = p11 + q*dt2
	return x, p
}

// Predict moves the filter dt seconds ahead (time update).
func (k *KalmanCV) Predict(dt float64) {
	k.X, k.P = k.Predicted(dt)
}

// Innovation returns the innovation ν = z − H·x and its variance
// S = H·P·Hᵀ + R for a measurement z against the current (predicted) state.
func (k *KalmanCV) Innovation(z float64) (nu, s float64) {
	return z - k.X[0], k.P[0][0] + k.MeasSigma*k.MeasSigma
}

// Update folds the measurement z into the state (measurement update) and
// returns the gain K = P·Hᵀ/S that was applied. The covariance uses the
// Joseph form, which stays symmetric and positive under rounding.
func (k *KalmanCV) Update(z float64) (gain [2]float64) {
	nu, s := k.Innovation(z)
	gain = [2]float64{k.P[0][0] / s, k.P[1][0] / s}
	k.X[0] += gain[0] * nu
	k.X[1] += gain[1] * nu

	// Joseph form: P = (I−KH) P (I−KH)ᵀ + K R Kᵀ.
	r := k.MeasSigma * k.MeasSigma
	a00, a10 := 1-gain[0], -gain[1] // I−KH = [[a00, 0], [a10, 1]]
	p00, p01, p10, p11 := k.P[0][0], k.P[0][1], k.P[1][0], k.P[1][1]
	// M = (I−KH) P
	m00, m01 := a00*p00, a00*p01
	m10, m11 := a10*p00+p10, a10*p01+p11
	// P = M (I−KH)ᵀ + K R Kᵀ
	n00 := m00*a00 + gain[0]*gain[0]*r
	n01 := m00*a10 + m01 + gain[0]*gain[1]*r
	n11 := m10*a10 + m11 + gain[1]*gain[1]*r
	k.P = [2][2]float64{{n00, n01}, {n01, n11}}
	return gain
}

// SteadyStateGains returns the steady-state gains of KalmanCV for the
// tracking index lambda = σa·T²/σv, as the alpha-beta pair
// α = K[0], β = K[1]·T.
//
// It runs the filter's own Riccati recursion (Predict then Update with
// T = 1 s, σv = 1, σa = lambda) until the gains stop changing; it does not
// use a closed form. It returns NaN, NaN for lambda ≤ 0 or not finite.
func SteadyStateGains(lambda float64) (alpha, beta float64) {
	if !(lambda > 0) || math.IsInf(lambda, 0) {
		return math.NaN(), math.NaN()
	}
	k := NewKalmanCV(lambda, 1)
	k.Init(0, 1e3)
	prev := [2]float64{math.Inf(1), math.Inf(1)}
	for i := 0; i < 1_000_000; i++ {
		k.Predict(1)
		g := k.Update(0)
		if math.Abs(g[0]-prev[0]) < 1e-15 && math.Abs(g[1]-prev[1]) < 1e-15 {
			return g[0], g[1]
		}
		prev = g
	}
	return prev[0], prev[1]
}

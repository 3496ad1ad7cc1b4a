package guidance

import (
	"math"
	"time"
)

// Manoeuvre handling: a small bank of motion models.
//
// One constant-velocity filter tuned for a vehicle running smoothly along
// its stripe (OffsetAccel, HeadingAccel) lags when the vehicle weaves hard
// or the camera swings: the stripe's image then accelerates at several
// thousand px/s², the prediction overshoots at every reversal, and the
// innovation gate refuses measurements that were right. A filter tuned for
// hard weaving all the time would instead open the gate wide on a straight
// run, where a tyre mark or a branch should be refused.
//
// The tracker therefore runs a few copies of the filter side by side, the
// same constant-velocity model with the process noise scaled by
// ModelAccelFactors, all fed the same accepted measurements. Each keeps an
// exponentially forgotten sum (time constant ModelMemory) of the
// log-likelihood of those measurements under its own prediction, and the
// one with the highest sum is the filter in use: its state is the
// estimate, and its innovation covariance is the gate. This is the
// model-selection form of the multiple-model approach (Bar-Shalom, Li and
// Kirubarajan, "Estimation with Applications to Tracking and Navigation",
// Wiley 2001, ch. 11: "adjustable level process noise" and the static
// multiple-model estimator); it switches within a few frames of a
// manoeuvre's start and back once the run is smooth again.
//
// Only measurements the gate accepted feed the bank, so a distractor that
// the gate refuses never widens the gate for itself.
var ModelAccelFactors = [...]float64{1, 4, 16}

// ModelMemory is the time constant over which the models' likelihoods
// are compared.
const ModelMemory = 500 * time.Millisecond

type model struct {
	off, head KalmanCV
	score     float64 // forgotten sum of log-likelihoods
}

type modelBank struct {
	m   [len(ModelAccelFactors)]model
	sel int // the model in use
}

// setNoise sets every model's noise levels from the base settings.
func (b *modelBank) setNoise(offAccel, offMeas, headAccel, headMeas float64) {
	for i := range b.m {
		f := ModelAccelFactors[i]
		b.m[i].off.AccelSigma, b.m[i].off.MeasSigma = offAccel*f, offMeas
		b.m[i].head.AccelSigma, b.m[i].head.MeasSigma = headAccel*f, headMeas
	}
}

// init starts every model at m, with the base model in use.
func (b *modelBank) init(m Measurement, offRate, headRate float64) {
	for i := range b.m {
		b.m[i].off.Init(m.OffsetPx, offRate)
		b.m[i].head.Init(m.HeadingDeg, headRate)
		b.m[i].score = 0
	}
	b.sel = 0
}

// adopt sets every model's state to the given filters' (a re-lock on a
// step), keeping each model's own noise levels, with the base model in use.
func (b *modelBank) adopt(off, head KalmanCV) {
	for i := range b.m {
		b.m[i].off.X, b.m[i].off.P, b.m[i].off.Ready = off.X, off.P, off.Ready
		b.m[i].head.X, b.m[i].head.P, b.m[i].head.Ready = head.X, head.P, head.Ready
		b.m[i].score = 0
	}
	b.sel = 0
}

func (b *modelBank) predict(dt float64) {
	for i := range b.m {
		b.m[i].off.Predict(dt)
		b.m[i].head.Predict(dt)
	}
}

// update folds m into every model, scores each model's prediction of m
// and selects the best. dt is the time since the previous update (for the
// forgetting).
func (b *modelBank) update(m Measurement, dt float64) {
	keep := math.Exp(-math.Max(0, dt) / ModelMemory.Seconds())
	best := 0
	for i := range b.m {
		md := &b.m[i]
		no, so := md.off.Innovation(m.OffsetPx)
		nh, sh := md.head.Innovation(m.HeadingDeg)
		ll := -0.5 * (no*no/so + nh*nh/sh + math.Log(so*sh))
		md.score = keep*md.score + ll
		md.off.Update(m.OffsetPx)
		md.head.Update(m.HeadingDeg)
		if md.score > b.m[best].score {
			best = i
		}
	}
	b.sel = best
}

// use is the model in use; smooth the smooth-running one (ModelAccelFactors[0]).
func (b *modelBank) use() *model    { return &b.m[b.sel] }
func (b *modelBank) smooth() *model { return &b.m[0] }

// ready reports whether the models hold a track (init since the last clear).
func (b *modelBank) ready() bool { return b.m[0].off.Ready }

// clear forgets the track (the models keep their noise levels).
func (b *modelBank) clear() {
	for i := range b.m {
		b.m[i].off.Ready, b.m[i].head.Ready = false, false
	}
}

// gateNIS is the innovation test statistic of m for a locked track. While
// Holding it uses the model in use, so a manoeuvre that the measurements
// have shown widens the gate.
//
// While Coasting (the latest frames brought nothing usable) a line is
// taken back when it passes either of two tests. The first is the
// smooth-running model's gate. The second is the model in use's
// prediction, which keeps following a manoeuvre that the smooth model
// lags behind (a weave's reversal, a tight bend), but judged with no more
// than the innovation variances of the gate that took the last measurement
// (heldS): coasting never widens the gate beyond what Holding last
// accepted. The wide prediction of a high-noise model after several lost
// frames would otherwise let almost any line back in; a line that really
// moved is taken up by the step candidate (StepConfirmFrames agreeing
// measurements) instead.
func (t *Tracker) gateNIS(m Measurement) float64 {
	md := t.bank.use()
	if t.state != Coasting {
		return nis(&md.off, &md.head, m)
	}
	d2 := nis(&t.bank.smooth().off, &t.bank.smooth().head, m)
	if md == t.bank.smooth() || t.heldS[0] <= 0 || t.heldS[1] <= 0 {
		return d2
	}
	no, so := md.off.Innovation(m.OffsetPx)
	nh, sh := md.head.Innovation(m.HeadingDeg)
	so, sh = math.Min(so, t.heldS[0]), math.Min(sh, t.heldS[1])
	return math.Min(d2, no*no/so+nh*nh/sh)
}

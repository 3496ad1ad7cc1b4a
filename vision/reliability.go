package vision

import (
	"fmt"
	"math"
)

// ReliabilityBin is one row of a reliability table: the detections whose
// stated confidence fell in [Lo, Hi), how many there were, their mean
// stated confidence and the fraction of them that were in fact correct.
type ReliabilityBin struct {
	Lo, Hi         float64
	N              int
	MeanConfidence float64
	Accuracy       float64
}

// Reliability sorts detections by stated confidence into bins equal-width
// bins over [0, 1] and compares, per bin, the mean stated confidence with
// the observed fraction correct (a reliability diagram). It also returns
// the expected calibration error, ECE = Σ (N_b/N)·|Accuracy_b −
// MeanConfidence_b| (the usual definition, e.g. Guo et al., ICML 2017;
// from memory): 0 when the confidence means exactly what it says.
//
// confidence and correct are parallel: correct[i] says whether detection
// i was right by the caller's rule (for example the TuSimple point rule).
// Reliability does not retain them.
func Reliability(confidence []float64, correct []bool, bins int) ([]ReliabilityBin, float64, error) {
	if len(confidence) != len(correct) {
		return nil, 0, fmt.Errorf("vision: reliability: %d confidences but %d outcomes", len(confidence), len(correct))
	}
	if bins < 1 {
		return nil, 0, fmt.Errorf("vision: reliability: %d bins", bins)
	}
	table := make([]ReliabilityBin, bins)
	for i := range table {
		table[i].Lo = float64(i) / float64(bins)
		table[i].Hi = float64(i+1) / float64(bins)
	}
	for i, c := range confidence {
		if math.IsNaN(c) || c < 0 || c > 1 {
			return nil, 0, fmt.Errorf("vision: reliability: confidence %v outside [0, 1]", c)
		}
		b := min(int(c*float64(bins)), bins-1)
		table[b].N++
		table[b].MeanConfidence += c
		if correct[i] {
			table[b].Accuracy++
		}
	}
	ece := 0.0
	for i := range table {
		if n := float64(table[i].N); n > 0 {
			table[i].MeanConfidence /= n
			table[i].Accuracy /= n
			ece += n / float64(len(confidence)) * math.Abs(table[i].Accuracy-table[i].MeanConfidence)
		}
	}
	return table, ece, nil
}

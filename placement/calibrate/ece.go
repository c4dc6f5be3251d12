package calibrate

import (
	"fmt"
	"math"
)

// Bins is the number of equal-width confidence bins of the expected calibration error.
const Bins = 10

// Bin is one confidence bin of a reliability diagram.
type Bin struct {
	// Lo and Hi bound the bin's confidences: (Lo, Hi], the first bin [0, Hi].
	Lo float64 `json:"lo"`
	Hi float64 `json:"hi"`
	// Count is the number of placements in the bin; Confidence their mean confidence and
	// Accuracy the share of them that were correct.
	Count      int     `json:"count"`
	Confidence float64 `json:"confidence"`
	Accuracy   float64 `json:"accuracy"`
}

// Reliability sorts confidences into Bins equal-width bins and returns the bins and the expected
// calibration error
//
//	ECE = sum_b (n_b / N) |acc_b - conf_b|,
//
// the weighted mean gap between the share correct and the mean confidence in each bin (Naeini,
// Cooper & Hauskrecht 2015, AAAI; Guo, Pleiss, Sun & Weinberger 2017, ICML; from memory). A
// confidence falls in bin b when exactly b of the inner edges 0.1, ..., 0.9 lie below it, so bins
// are closed on the right, as in scikit-learn's calibration_curve(strategy="uniform").
func Reliability(confidence []float64, correct []bool) ([]Bin, float64, error) {
	if len(confidence) != len(correct) {
		return nil, 0, fmt.Errorf("reliability: %d confidences for %d outcomes", len(confidence), len(correct))
	}
	if len(confidence) == 0 {
		return nil, 0, fmt.Errorf("reliability: no placements")
	}
	bins := make([]Bin, Bins)
	sums := make([]float64, Bins)
	for b := range bins {
		bins[b].Lo, bins[b].Hi = float64(b)*(1.0/Bins), float64(b+1)*(1.0/Bins)
	}
	for i, c := range confidence {
		if !(c >= 0 && c <= 1) {
			return nil, 0, fmt.Errorf("reliability: confidence %d is %v; expected a probability", i, c)
		}
		b := binOf(c)
		bins[b].Count++
		sums[b] += c
		if correct[i] {
			bins[b].Accuracy++
		}
	}
	ece := 0.0
	n := float64(len(confidence))
	for b := range bins {
		if bins[b].Count == 0 {
			continue
		}
		cnt := float64(bins[b].Count)
		bins[b].Confidence = sums[b] / cnt
		bins[b].Accuracy /= cnt
		ece += cnt / n * math.Abs(bins[b].Accuracy-bins[b].Confidence)
	}
	return bins, ece, nil
}

// binOf returns the bin of confidence c: the number of inner edges strictly below it.
func binOf(c float64) int {
	b := 0
	for e := 1; e < Bins; e++ {
		if float64(e)*(1.0/Bins) < c { // the edges of numpy.linspace(0, 1, 11)
			b = e
		}
	}
	return b
}

package rank

import (
	"fmt"
	"math"
)

// Rule holds the thresholds of the rank rule (see Recommend).
type Rule struct {
	// MinCophenetic and MinDispersion are the least cophenetic correlation and dispersion for
	// a k to count as stable.
	MinCophenetic, MinDispersion float64
}

// DefaultRule returns the thresholds used by Sweep: cophenetic correlation at least 0.95 and
// dispersion at least 0.85.
func DefaultRule() Rule { return Rule{MinCophenetic: 0.95, MinDispersion: 0.85} }

// Stable reports whether the measures of k pass the rule's thresholds.
func (r Rule) Stable(kr KResult) bool {
	return kr.Cophenetic >= r.MinCophenetic && kr.Dispersion >= r.MinDispersion
}

// elbows sets Gain and Elbow of each k from the objectives (see Recommend). base is the
// objective at ks[0].K - 1.
func elbows(base float64, ks []KResult) {
	prev := base
	for i := range ks {
		ks[i].Gain = math.Max(prev-ks[i].Objective, 0)
		prev = ks[i].Objective
	}
	for i := range ks {
		ks[i].Elbow = math.NaN()
		if i == len(ks)-1 {
			break
		}
		later := 0.0
		for _, kr := range ks[i+1:] {
			later += kr.Gain
		}
		later /= float64(len(ks) - 1 - i)
		switch {
		case later > 0:
			ks[i].Elbow = ks[i].Gain / later
		case ks[i].Gain > 0:
			ks[i].Elbow = math.Inf(1)
		default:
			ks[i].Elbow = 0
		}
	}
}

// Recommend picks a number of groups from the measures of a sweep (ks in increasing k, with
// Gain and Elbow set). The rule, our own design (tuned on simulated traditions; it combines the
// usual reading of an objective curve's elbow with Brunet's and Kim & Park's stability measures):
//
//  1. Fit: the gain of k is the fall of the best objective from k-1 to k, g(k) = f(k-1) - f(k)
//     (clamped at 0). While k is below the number of groups the data hold, each new component
//     separates a group and the gain is large; past it, new components fit the copyists' noise
//     and the gains level off. The elbow score of k compares its gain with the mean gain of the
//     larger k of the sweep, E(k) = g(k) / mean(g(k+1), ..., g(k_max)); it is not defined for
//     k_max, which therefore cannot be recommended unless it is the only k.
//  2. Stability: k is stable if its consensus matrix over the random starts has cophenetic
//     correlation >= Rule.MinCophenetic and dispersion >= Rule.MinDispersion, i.e. the starts
//     group the witnesses (nearly) alike.
//  3. The recommended k is the stable k with the largest elbow score (the smaller k on a tie).
//     If no k is stable, the k with the largest elbow score is recommended and the reason says
//     the grouping is unstable.
//
// The reason is a sentence that says which case applied and the figures behind it.
func Recommend(ks []KResult, rule Rule) (k int, reason string) {
	if len(ks) == 0 {
		return 0, "no k was tried"
	}
	if len(ks) == 1 {
		return ks[0].K, fmt.Sprintf("k = %d is the only k tried", ks[0].K)
	}
	best, bestStable := -1, -1
	for i, kr := range ks[:len(ks)-1] {
		if best < 0 || kr.Elbow > ks[best].Elbow {
			best = i
		}
		if rule.Stable(kr) && (bestStable < 0 || kr.Elbow > ks[bestStable].Elbow) {
			bestStable = i
		}
	}
	if bestStable >= 0 {
		kr := ks[bestStable]
		return kr.K, fmt.Sprintf("k = %d: the largest elbow score among the stable k (gain %.4g, %.3g times the mean gain of larger k; cophenetic correlation %.3f, dispersion %.3f)",
			kr.K, kr.Gain, kr.Elbow, kr.Cophenetic, kr.Dispersion)
	}
	kr := ks[best]
	return kr.K, fmt.Sprintf("k = %d: the largest elbow score (%.3g), but no k of %d..%d is stable (cophenetic correlation >= %.2f and dispersion >= %.2f): the starts disagree on the grouping",
		kr.K, kr.Elbow, ks[0].K, ks[len(ks)-2].K, rule.MinCophenetic, rule.MinDispersion)
}

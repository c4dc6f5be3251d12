package rank

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"sync"

	"gonum.org/v1/gonum/mat"

	"strayleaf/placement/nmf"
)

// KResult holds the measures for one k.
type KResult struct {
	K int
	// Objective is the lowest objective over the starts; Objectives that of each start.
	Objective  float64
	Objectives []float64
	// Iterations holds the ANLS iterations of each start.
	Iterations []int
	// SparsenessW and SparsenessH are the mean Hoyer sparseness of the columns of W and of H of
	// the best start.
	SparsenessW, SparsenessH float64
	// Cophenetic is the cophenetic correlation of the consensus matrix; Dispersion its
	// dispersion coefficient.
	Cophenetic, Dispersion float64
	// Gain is the fall of the objective from k-1 to k, and Elbow the elbow score (NaN for the
	// largest k); see Recommend.
	Gain, Elbow float64
	// Consensus is the consensus matrix over the starts (witnesses x witnesses).
	Consensus *Consensus
	// Best is the factorisation of the best start.
	Best *nmf.Result
}

// SweepResult is the outcome of a sweep over k.
type SweepResult struct {
	// Restarts is the number of random starts per k.
	Restarts int
	// BaseK is Ks[0].K - 1 and BaseObjective its best objective, from which the gain of the
	// first k is measured (for BaseK = 0, ||M .* X||^2).
	BaseK         int
	BaseObjective float64
	// Ks holds the measures for k = KMin..KMax in order.
	Ks []KResult
	// Recommended is the k the rule recommends, and Reason says why (see Recommend).
	Recommended int
	Reason      string
}

// Sweep defaults: a sweep needs each k's grouping and the shape of the objective curve, not the
// last digits of each fit, so its starts stop sooner than a model's training.
const (
	SweepTolerance     = 1e-4
	SweepMaxIterations = 100
)

// SweepOptions returns the NMF options a sweep uses by default: nmf.DefaultOptions with
// tolerance SweepTolerance and at most SweepMaxIterations iterations per start.
func SweepOptions() nmf.Options {
	o := nmf.DefaultOptions(1)
	o.Tolerance, o.MaxIterations = SweepTolerance, SweepMaxIterations
	return o
}

// Sweep factorises X (mask M) for every k from kMin to kMax from restarts random starts each,
// measures each k (package doc) and recommends one (Recommend with DefaultRule). To measure the
// gain of kMin it also factorises kMin - 1 (if kMin > 1) from as many starts. opt gives the NMF
// settings (tolerance, iteration cap, seed, workers; start from SweepOptions); Sweep sets its K,
// Init, Restarts, Progress and OnIteration. Start r of rank k is a separate run from random
// factors seeded from opt.Seed, k and r; the runs are spread over opt.Workers goroutines (all
// cores by default), each run on one, so the result depends only on the data and the options,
// not on the number of workers. progress, if set, is called after each run with the number done
// and the total.
func Sweep(X, M *mat.Dense, kMin, kMax, restarts int, opt nmf.Options, progress func(done, total int)) (*SweepResult, error) {
	return SweepContext(context.Background(), X, M, kMin, kMax, restarts, opt, progress)
}

// SweepContext is Sweep with a context, checked between iterations of every run.
func SweepContext(ctx context.Context, X, M *mat.Dense, kMin, kMax, restarts int, opt nmf.Options, progress func(done, total int)) (*SweepResult, error) {
	p, err := nmf.NewProblem(X, M)
	if err != nil {
		return nil, fmt.Errorf("rank sweep: %w", err)
	}
	_, n := p.Dims()
	switch {
	case kMin < 1 || kMax < kMin:
		return nil, fmt.Errorf("rank sweep: k range %d..%d; expected 1 <= k_min <= k_max", kMin, kMax)
	case restarts < 2:
		return nil, fmt.Errorf("rank sweep: %d starts per k; a consensus needs at least 2", restarts)
	case n < 2:
		return nil, fmt.Errorf("rank sweep: %d witness(es); grouping needs at least 2", n)
	}
	workers := opt.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	lo := max(kMin-1, 1) // the ranks factorised: lo..kMax
	type job struct{ k, r int }
	var jobs []job
	for k := kMax; k >= lo; k-- { // the largest (slowest) first, for an even spread
		for r := 0; r < restarts; r++ {
			jobs = append(jobs, job{k, r})
		}
	}
	results := make([][]*nmf.Result, kMax-lo+1)
	for i := range results {
		results[i] = make([]*nmf.Result, restarts)
	}
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	var (
		mu       sync.Mutex
		next     int
		done     int
		firstErr error
		errJob   = len(jobs)
		wg       sync.WaitGroup
	)
	for w := 0; w < min(workers, len(jobs)); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				mu.Lock()
				i := next
				next++
				mu.Unlock()
				if i >= len(jobs) {
					return
				}
				jb := jobs[i]
				o := opt
				o.K, o.Init, o.Restarts, o.Workers = jb.k, nmf.InitRandom, 1, 1
				o.Seed = nmf.DeriveSeed(opt.Seed, uint64(jb.k)<<32|uint64(jb.r))
				o.Progress, o.OnIteration = nil, nil
				res, err := p.Factorize(ctx, o)
				mu.Lock()
				if err != nil {
					if i < errJob {
						errJob, firstErr = i, fmt.Errorf("rank sweep: k = %d, start %d: %w", jb.k, jb.r, err)
					}
					cancel()
				} else {
					results[jb.k-lo][jb.r] = res
					done++
					if progress != nil {
						progress(done, len(jobs))
					}
				}
				mu.Unlock()
			}
		}()
	}
	wg.Wait()
	if firstErr != nil {
		return nil, firstErr
	}
	out := &SweepResult{Restarts: restarts, BaseK: kMin - 1, BaseObjective: p.NormSq()}
	if kMin > 1 {
		out.BaseObjective = math.Inf(1)
		for _, res := range results[0] {
			out.BaseObjective = math.Min(out.BaseObjective, res.Objective)
		}
	}
	for k := kMin; k <= kMax; k++ {
		kr, err := measure(k, results[k-lo], n)
		if err != nil {
			return nil, err
		}
		out.Ks = append(out.Ks, kr)
	}
	elbows(out.BaseObjective, out.Ks)
	out.Recommended, out.Reason = Recommend(out.Ks, DefaultRule())
	return out, nil
}

// measure computes the measures of one k from its runs.
func measure(k int, runs []*nmf.Result, n int) (KResult, error) {
	kr := KResult{K: k, Objectives: make([]float64, len(runs)), Iterations: make([]int, len(runs)), Consensus: NewConsensus(n)}
	for r, res := range runs {
		kr.Objectives[r] = res.Objective
		kr.Iterations[r] = res.Iterations
		if kr.Best == nil || res.Objective < kr.Best.Objective {
			kr.Best = res
		}
		if err := kr.Consensus.Add(Assign(res.H)); err != nil {
			return kr, err
		}
	}
	kr.Objective = kr.Best.Objective
	kr.SparsenessW = MeanColumnSparseness(kr.Best.W)
	kr.SparsenessH = MeanColumnSparseness(kr.Best.H)
	kr.Dispersion = kr.Consensus.Dispersion()
	c, err := kr.Consensus.Cophenetic()
	if err != nil {
		return kr, fmt.Errorf("rank sweep: k = %d: %w", k, err)
	}
	kr.Cophenetic = c
	return kr, nil
}

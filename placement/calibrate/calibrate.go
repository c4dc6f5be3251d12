// Package calibrate learns, at training time and from the training collation alone, the map from
// a placement's features to the probability that its best group is the witness's true group, and
// freezes it in the model.
//
// # Method
//
//  1. Train the model on the whole collation (model.Train) and store each unit's informativeness
//     and the probe list in it.
//  2. Split the training witnesses into K folds. For each fold, refit the profiles without the
//     fold's witnesses (same rows, weights and options as the model, so the fold model reads
//     witnesses exactly as the model does): by default warmly, a few ANLS steps from the model
//     itself (see warmRefit), or by a fresh NMF (Options.FreshRefits); then rescale the profiles
//     as training does.
//  3. Place each held-out witness whole against its fold's model: its best group there is the
//     answer its fragments should reach. A witness whose own group is in doubt there (flagged
//     mixed, or placed in different groups in different sections, see doubtful) has no single
//     answer and is left out, so the confidence speaks of witnesses of one group. From each of
//     the others (at most Options.Witnesses in all) cut simulated fragments at many coverage
//     levels, each level twice: a contiguous run of units, as a surviving leaf
//     (simulate.CutContiguous), and units scattered over the text, as spot checks
//     (simulate.CutScattered). Place each fragment against the fold's model and record its
//     features (model.Features) and whether its best group is the answer.
//  4. Learn the map: a logistic regression of correctness on the features (FitLogistic) gives a
//     score; isotonic regression of correctness on the score (FitIsotonic, pool adjacent
//     violators) turns it into a probability, monotone in the score. Its values are kept off 0 and
//     1 by 1/(2N), N the number of fragments: finitely many fragments never show certainty.
//  5. Report its quality honestly: each fold's fragments are scored by a map learnt from the
//     other folds' fragments only, and the expected calibration error over 10 bins is taken over
//     those scores (Reliability).
//
// The features of a placement are computed the same way for the fold models as for the frozen
// model, so the learnt map applies to the model's own placements. The preparation (kept
// readings, IDF weights) is the full collation's in every fold: a held-out witness has shaped its
// own weights a little, but not the group profiles.
package calibrate

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"
	"time"

	"gonum.org/v1/gonum/mat"
	"google.golang.org/protobuf/proto"

	"strayleaf/placement"
	"strayleaf/placement/collation"
	"strayleaf/placement/model"
	"strayleaf/placement/nmf"
	"strayleaf/placement/prepare"
	"strayleaf/placement/simulate"
	pb "strayleaf/proto/strayleaf/v1"
)

// Options are the settings of a calibration.
type Options struct {
	// Folds is K, the number of refits (default 3; at least 2).
	Folds int
	// Levels are the coverage levels of the simulated fragments, as shares of the collation's
	// units (default DefaultLevels).
	Levels []float64
	// Cuts is the number of fragments of each form cut per held-out witness and level (default 1).
	Cuts int
	// Witnesses is the most held-out witnesses fragments are cut from, over all folds (default
	// 96): enough fragments for a stable map without placing every witness of a large tradition.
	Witnesses int
	// Seed seeds the fold split and the cuts.
	Seed uint64
	// Penalty is the L2 penalty of the logistic regression (default 1).
	Penalty float64
	// WarmSteps is the number of ANLS steps of a warm refit (default 2; see warmRefit).
	WarmSteps int
	// FreshRefits refits each fold by a full NMF from its own start instead of warmly from the
	// model. FoldRestarts and FoldMaxIterations drive those (defaults: 1 restart, and the model's
	// own iteration cap).
	FreshRefits       bool
	FoldRestarts      int
	FoldMaxIterations int
	// Workers is the number of goroutines placing fragments (default GOMAXPROCS).
	Workers int
	// Progress, if set, is called as folds finish.
	Progress func(done, total int)
}

// DefaultLevels are the default coverage levels of the simulated fragments.
var DefaultLevels = []float64{0.01, 0.02, 0.03, 0.05, 0.075, 0.1, 0.15, 0.2, 0.3, 0.45}

func (o Options) withDefaults() Options {
	if o.Folds == 0 {
		o.Folds = 3
	}
	if o.Levels == nil {
		o.Levels = DefaultLevels
	}
	if o.Cuts == 0 {
		o.Cuts = 1
	}
	if o.Witnesses == 0 {
		o.Witnesses = 96
	}
	if o.Penalty == 0 {
		o.Penalty = 1
	}
	if o.WarmSteps == 0 {
		o.WarmSteps = 2
	}
	if o.FoldRestarts == 0 {
		o.FoldRestarts = 1
	}
	if o.Workers <= 0 {
		o.Workers = runtime.GOMAXPROCS(0)
	}
	return o
}

func (o Options) validate(trainWitnesses int) error {
	if o.Folds < 2 {
		return fmt.Errorf("calibration: folds is %d; expected at least 2", o.Folds)
	}
	if o.Folds > trainWitnesses {
		return fmt.Errorf("calibration: %d folds for %d training witnesses; expected at most one fold per witness", o.Folds, trainWitnesses)
	}
	for _, l := range o.Levels {
		if !(l > 0 && l < 1) {
			return fmt.Errorf("calibration: coverage level %v; expected a share between 0 and 1", l)
		}
	}
	if len(o.Levels) == 0 || o.Cuts < 1 || o.Witnesses < o.Folds {
		return fmt.Errorf("calibration: no fragments to learn from (%d levels, %d cuts, %d witnesses for %d folds)", len(o.Levels), o.Cuts, o.Witnesses, o.Folds)
	}
	if !(o.Penalty >= 0) {
		return fmt.Errorf("calibration: penalty %v; expected >= 0", o.Penalty)
	}
	return nil
}

// Form names of the simulated fragments.
const (
	FormLeaf      = simulate.FormLeaf
	FormScattered = simulate.FormScattered
	// formDoubtful marks, internally, a held-out witness left out as doubtful.
	formDoubtful = "doubtful"
)

// Sample is one simulated fragment placed against a fold model.
type Sample struct {
	Fold     int
	Witness  string
	Coverage float64
	Form     string
	Features model.Features
	Correct  bool
	// Confidence is the cross-fitted confidence (from a map learnt without this fold).
	Confidence float64
}

// LevelSummary sums up the fragments of one coverage level and form.
type LevelSummary struct {
	Coverage       float64 `json:"coverage"`
	Form           string  `json:"form"`
	Samples        int     `json:"samples"`
	Accuracy       float64 `json:"accuracy"`
	MeanConfidence float64 `json:"mean_confidence"`
}

// Report is what a calibration found.
type Report struct {
	Folds   int `json:"folds"`
	Samples int `json:"samples"`
	// ECE is the cross-fitted expected calibration error over Bins bins; Bins the bins behind it.
	ECE  float64 `json:"expected_calibration_error"`
	Bins []Bin   `json:"reliability"`
	// Features and Coefficients are the logistic score (Coefficients[0] the intercept).
	Features     []string       `json:"features"`
	Coefficients []float64      `json:"coefficients"`
	ByLevel      []LevelSummary `json:"by_level"`
	// TrainSeconds is the time of model.Train; CalibrationSeconds the time added by calibration.
	TrainSeconds       float64 `json:"train_seconds"`
	CalibrationSeconds float64 `json:"calibration_seconds"`
	// RefitSeconds and FragmentSeconds are the parts of it spent refitting the folds and placing
	// the fragments.
	RefitSeconds    float64 `json:"refit_seconds"`
	FragmentSeconds float64 `json:"fragment_seconds"`
	// Doubtful are the held-out witnesses left out because their own group is in doubt.
	Doubtful []string `json:"doubtful_witnesses"`
	// FoldIterations are the NMF iterations of each fold's refit.
	FoldIterations []int `json:"fold_iterations"`
	// SamplesDetail are the fragments themselves (not written to JSON).
	SamplesDetail []Sample `json:"-"`
}

// Train trains a model on c (model.Train), calibrates it (Calibrate) and returns the model
// message with its calibration, informativeness and probe list, and the calibration report.
func Train(c *collation.Collation, opt model.TrainOptions, copt Options) (*pb.Model, *Report, error) {
	return TrainContext(context.Background(), c, opt, copt)
}

// TrainContext is Train with a context, checked between folds.
func TrainContext(ctx context.Context, c *collation.Collation, opt model.TrainOptions, copt Options) (*pb.Model, *Report, error) {
	start := time.Now()
	m, prep, err := model.Train(c, opt)
	if err != nil {
		return nil, nil, err
	}
	trained := time.Since(start)
	rep, err := CalibrateContext(ctx, m, prep, opt, copt)
	if err != nil {
		return nil, nil, err
	}
	rep.TrainSeconds = trained.Seconds()
	return m, rep, nil
}

// Calibrate adds informativeness, the probe list and the calibration to m, a model just trained
// by model.Train from prep with opt.
func Calibrate(m *pb.Model, prep *prepare.Prepared, opt model.TrainOptions, copt Options) (*Report, error) {
	return CalibrateContext(context.Background(), m, prep, opt, copt)
}

// CalibrateContext is Calibrate with a context.
func CalibrateContext(ctx context.Context, m *pb.Model, prep *prepare.Prepared, opt model.TrainOptions, copt Options) (*Report, error) {
	start := time.Now()
	copt = copt.withDefaults()
	if err := copt.validate(len(prep.Train)); err != nil {
		return nil, err
	}
	if len(prep.Train) != len(m.TrainingWitnesses) || len(prep.Rows) != len(m.Rows) {
		return nil, fmt.Errorf("calibration: the model and the preparation do not match (%d/%d training witnesses, %d/%d rows)",
			len(m.TrainingWitnesses), len(prep.Train), len(m.Rows), len(prep.Rows))
	}
	m.Calibration = nil
	m.Informativeness = nil
	m.ProbeUnits = nil
	full, err := model.FromProto(m)
	if err != nil {
		return nil, fmt.Errorf("calibration: %w", err)
	}
	m.Informativeness = append([]float64(nil), full.Informativeness()...)
	for _, u := range full.ComputeProbeUnits(model.DefaultProbeUnits) {
		m.ProbeUnits = append(m.ProbeUnits, int32(u))
	}

	// Folds: a seeded shuffle of the training witnesses, dealt round-robin.
	nt := len(prep.Train)
	perm := make([]int, nt)
	for i := range perm {
		perm[i] = i
	}
	rng := rand.New(rand.NewPCG(copt.Seed, 0x666f6c6473)) // "folds"
	rng.Shuffle(nt, func(i, j int) { perm[i], perm[j] = perm[j], perm[i] })
	foldOf := make([]int, nt)
	for i, j := range perm {
		foldOf[j] = i % copt.Folds
	}

	var samples []Sample
	var refitTime, placeTime time.Duration
	var foldIters []int
	var doubtfulWitnesses []string
	for f := 0; f < copt.Folds; f++ {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		t0 := time.Now()
		fm, iters, err := refit(m, full, prep, opt, copt, foldOf, f)
		if err != nil {
			return nil, fmt.Errorf("calibration: fold %d: %w", f+1, err)
		}
		t1 := time.Now()
		refitTime += t1.Sub(t0)
		foldIters = append(foldIters, iters)
		var held []int // in shuffled order, at most a fold's share of copt.Witnesses
		for _, j := range perm {
			if foldOf[j] == f && len(held) < (copt.Witnesses+copt.Folds-1)/copt.Folds {
				held = append(held, j)
			}
		}
		s, err := fragments(fm, prep, held, f, copt)
		if err != nil {
			return nil, fmt.Errorf("calibration: fold %d: %w", f+1, err)
		}
		for _, x := range s {
			if x.Form == formDoubtful {
				doubtfulWitnesses = append(doubtfulWitnesses, x.Witness)
				continue
			}
			samples = append(samples, x)
		}
		placeTime += time.Since(t1)
		if copt.Progress != nil {
			copt.Progress(f+1, copt.Folds)
		}
	}
	if len(samples) == 0 {
		return nil, fmt.Errorf("calibration: no simulated fragment could be placed")
	}

	// Cross-fitted confidences, then the map from all fragments.
	for f := 0; f < copt.Folds; f++ {
		var train []Sample
		for _, s := range samples {
			if s.Fold != f {
				train = append(train, s)
			}
		}
		cm, err := fitMap(train, copt.Penalty)
		if err != nil {
			return nil, fmt.Errorf("calibration: fold %d: %w", f+1, err)
		}
		for i := range samples {
			if samples[i].Fold == f {
				samples[i].Confidence = cm.apply(samples[i].Features)
			}
		}
	}
	final, err := fitMap(samples, copt.Penalty)
	if err != nil {
		return nil, fmt.Errorf("calibration: %w", err)
	}
	conf := make([]float64, len(samples))
	correct := make([]bool, len(samples))
	for i, s := range samples {
		conf[i], correct[i] = s.Confidence, s.Correct
	}
	bins, ece, err := Reliability(conf, correct)
	if err != nil {
		return nil, fmt.Errorf("calibration: %w", err)
	}
	cal := &pb.Calibration{
		Method: model.MethodLogisticIsotonic, Thresholds: final.thresholds, Values: final.values,
		Coefficients: final.coef, ExpectedCalibrationError: ece, Samples: int32(len(samples)),
		Features: append([]string(nil), model.FeatureNames...), Folds: int32(copt.Folds),
	}
	for _, b := range bins {
		cal.Reliability = append(cal.Reliability, &pb.ReliabilityBin{Lo: b.Lo, Hi: b.Hi, Count: int32(b.Count), Confidence: b.Confidence, Accuracy: b.Accuracy})
	}
	m.Calibration = cal
	rep := &Report{
		Folds: copt.Folds, Samples: len(samples), ECE: ece, Bins: bins,
		Features: cal.Features, Coefficients: cal.Coefficients, ByLevel: byLevel(samples), SamplesDetail: samples,
		CalibrationSeconds: time.Since(start).Seconds(), RefitSeconds: refitTime.Seconds(), FragmentSeconds: placeTime.Seconds(),
		FoldIterations: foldIters, Doubtful: doubtfulWitnesses,
	}
	return rep, nil
}

// refit learns fold f's model: the NMF of the training witnesses outside fold f, rescaled as
// model.Train rescales (each column by the mean coefficient of the witnesses whose largest
// coefficient it holds), wrapped in a copy of m.
func refit(m *pb.Model, full *model.Model, prep *prepare.Prepared, opt model.TrainOptions, copt Options, foldOf []int, f int) (*model.Model, int, error) {
	var cols []int
	for j, g := range foldOf {
		if g != f {
			cols = append(cols, j)
		}
	}
	nr := len(prep.Rows)
	k := int(m.GroupCount)
	var W, H *mat.Dense
	iterations := copt.WarmSteps
	if copt.FreshRefits {
		fopt := opt
		fopt.Groups, fopt.Seed, fopt.Restarts, fopt.Progress = k, opt.Seed+uint64(f)+1, copt.FoldRestarts, nil
		nopt := fopt.NMFOptions()
		if copt.FoldMaxIterations > 0 {
			nopt.MaxIterations = copt.FoldMaxIterations
		}
		if k > min(nr, len(cols)) {
			nopt.Init = nmf.InitRandom
		}
		X := mat.NewDense(nr, len(cols), nil)
		M := mat.NewDense(nr, len(cols), nil)
		for c, j := range cols {
			for r := 0; r < nr; r++ {
				X.Set(r, c, prep.X.At(r, j))
				M.Set(r, c, prep.M.At(r, j))
			}
		}
		res, err := nmf.Factorize(X, M, nopt)
		if err != nil {
			return nil, 0, err
		}
		W, H, iterations = res.W, res.H, res.Iterations
	} else {
		var err error
		if W, H, err = warmRefit(full.Engine(), full.W(), prep, cols, copt.WarmSteps); err != nil {
			return nil, 0, err
		}
	}
	nt := len(cols)
	profile := make([]float64, nr*k)
	groups := make([]*pb.GroupSummary, k)
	for g := 0; g < k; g++ {
		sum, n := 0.0, 0
		for j := 0; j < nt; j++ {
			if argmax(mat.Col(nil, j, H)) == g {
				sum += H.At(g, j)
				n++
			}
		}
		s := mat.Max(H.RowView(g))
		if n > 0 {
			s = sum / float64(n)
		}
		if !(s > 0) {
			s = 1
		}
		for r := 0; r < nr; r++ {
			profile[r*k+g] = W.At(r, g) * s
		}
		groups[g] = &pb.GroupSummary{Id: fmt.Sprintf("F%d", g+1), Size: int32(n)}
	}
	fm := &pb.Model{
		Units: m.Units, Rows: m.Rows, GroupCount: m.GroupCount, Profile: profile, Groups: groups,
		Prepare: proto.Clone(m.Prepare).(*pb.PrepareSettings),
	}
	dm, err := model.FromProto(fm)
	return dm, iterations, err
}

func argmax(v []float64) int {
	b := 0
	for i, x := range v {
		if x > v[b] {
			b = i
		}
	}
	return b
}

// fragments places the held-out witnesses (training indexes) whole and cut, against fm.
func fragments(fm *model.Model, prep *prepare.Prepared, held []int, fold int, copt Options) ([]Sample, error) {
	c := prep.Collation
	nu := c.NumUnits()
	results := make([][]Sample, len(held))
	errs := make([]error, len(held))
	var next sync.Mutex
	i := 0
	var wg sync.WaitGroup
	for w := 0; w < min(copt.Workers, len(held)); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			ws := fm.Engine().NewWorkspace()
			for {
				next.Lock()
				h := i
				i++
				next.Unlock()
				if h >= len(held) {
					return
				}
				results[h], errs[h] = witnessFragments(fm, c, prep.Train[held[h]], fold, nu, copt, ws)
			}
		}()
	}
	wg.Wait()
	var out []Sample
	for h := range held {
		if errs[h] != nil {
			return nil, errs[h]
		}
		out = append(out, results[h]...)
	}
	return out, nil
}

func witnessFragments(fm *model.Model, c *collation.Collation, w, fold, nu int, copt Options, ws *placement.Workspace) ([]Sample, error) {
	row := c.Row(w)
	siglum := c.Witness(w)
	all := readingsOf(c, row)
	whole, err := fm.PlaceWith(siglum, all, ws, model.PlaceOptions{})
	if err != nil || whole.BestGroup == "" {
		return nil, nil // a witness the fold model cannot place gives no answer to aim at
	}
	if doubtful(fm, whole, all) {
		return []Sample{{Fold: fold, Witness: siglum, Form: formDoubtful}}, nil
	}
	rng := rand.New(rand.NewPCG(copt.Seed^mixSeed(uint64(w)), uint64(fold)+0x637574)) // "cut"
	var out []Sample
	for _, level := range copt.Levels {
		n := max(1, int(math.Round(level*float64(nu))))
		for cut := 0; cut < copt.Cuts; cut++ {
			for _, form := range []string{FormLeaf, FormScattered} {
				var frag []int32
				if form == FormLeaf {
					frag = simulate.CutContiguous(row, n, rng)
				} else {
					frag = simulate.CutScattered(row, n, rng)
				}
				rd := readingsOf(c, frag)
				if len(rd) == 0 {
					continue
				}
				p, err := fm.PlaceWith(siglum, rd, ws, model.PlaceOptions{})
				if err != nil {
					continue // no unit the model groups by: nothing to calibrate
				}
				out = append(out, Sample{Fold: fold, Witness: siglum, Coverage: level, Form: form, Features: p.Features, Correct: p.BestGroup == whole.BestGroup})
			}
		}
	}
	return out, nil
}

// doubtful reports a held-out witness whose own group is in doubt, so that its fragments have no
// single right answer: one flagged mixed, or one with two sections whose readings give different
// groups a posterior of at least 0.9 (model.GroupPosterior; the fold model has no calibration yet
// to read a confidence from).
func doubtful(fm *model.Model, whole *model.Placement, readings []model.Reading) bool {
	if whole.Mixed {
		return true
	}
	bySection := map[string][]model.Reading{}
	var order []string
	for _, r := range readings {
		s := fm.SectionOf(r.Unit)
		if s == "" {
			continue
		}
		if _, ok := bySection[s]; !ok {
			order = append(order, s)
		}
		bySection[s] = append(bySection[s], r)
	}
	group := ""
	for _, s := range order {
		q, err := fm.GroupPosterior(whole.Witness, bySection[s])
		if err != nil || q[0].Share < 0.9 {
			continue
		}
		if group != "" && q[0].Group != group {
			return true
		}
		group = q[0].Group
	}
	return false
}

func mixSeed(z uint64) uint64 {
	z += 0x9e3779b97f4a7c15
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// readingsOf lists the readings of a collation row.
func readingsOf(c *collation.Collation, row []int32) []model.Reading {
	var out []model.Reading
	for u, r := range row {
		if r != collation.Lacuna {
			un := c.Unit(u)
			out = append(out, model.Reading{Unit: un.ID, Reading: un.Readings[r]})
		}
	}
	return out
}

// confidenceMap is a learnt map from features to confidence.
type confidenceMap struct {
	coef               []float64
	thresholds, values []float64
}

func (c *confidenceMap) apply(f model.Features) float64 {
	v, _ := f.Values(model.FeatureNames)
	return model.InterpolateSteps(c.thresholds, c.values, model.CalibrationScore(c.coef, v))
}

// fitMap learns the logistic score and the isotonic map of it (package doc, step 4).
func fitMap(samples []Sample, penalty float64) (*confidenceMap, error) {
	if len(samples) == 0 {
		return nil, fmt.Errorf("no fragments to learn the map from")
	}
	x := make([][]float64, len(samples))
	y := make([]float64, len(samples))
	for i, s := range samples {
		v, err := s.Features.Values(model.FeatureNames)
		if err != nil {
			return nil, err
		}
		x[i] = v
		if s.Correct {
			y[i] = 1
		}
	}
	b0, b, err := FitLogistic(x, y, nil, penalty)
	if err != nil {
		return nil, err
	}
	coef := append([]float64{b0}, b...)
	z := make([]float64, len(samples))
	for i := range x {
		z[i] = model.CalibrationScore(coef, x[i])
	}
	th, val, err := FitIsotonic(z, y, nil)
	if err != nil {
		return nil, err
	}
	lo := 1 / (2 * float64(len(samples)))
	for i := range val {
		val[i] = math.Min(1-lo, math.Max(lo, val[i]))
	}
	return &confidenceMap{coef: coef, thresholds: th, values: val}, nil
}

func byLevel(samples []Sample) []LevelSummary {
	type key struct {
		c float64
		f string
	}
	idx := map[key]int{}
	var out []LevelSummary
	for _, s := range samples {
		k := key{s.Coverage, s.Form}
		i, ok := idx[k]
		if !ok {
			i = len(out)
			idx[k] = i
			out = append(out, LevelSummary{Coverage: s.Coverage, Form: s.Form})
		}
		out[i].Samples++
		out[i].MeanConfidence += s.Confidence
		if s.Correct {
			out[i].Accuracy++
		}
	}
	for i := range out {
		n := float64(out[i].Samples)
		out[i].Accuracy /= n
		out[i].MeanConfidence /= n
	}
	return out
}

package model

import (
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"

	"strayleaf/placement/collation"
	"strayleaf/placement/nmf"
	"strayleaf/placement/prepare"
	pb "strayleaf/proto/strayleaf/v1"
)

// TrainOptions are the settings of a training run.
type TrainOptions struct {
	// Groups is k, the number of groups to learn.
	Groups int
	// Prepare are the preparation settings (prepare.DefaultOptions() if zero).
	Prepare prepare.Options
	// Seed, Restarts, MaxIterations and Tolerance drive the NMF (see package nmf).
	Seed          uint64
	Restarts      int
	MaxIterations int
	Tolerance     float64
	// CollationSHA256 is the hex SHA-256 of the source collation file, recorded in the model.
	CollationSHA256 string
	// Progress, if set, is called as restarts finish.
	Progress func(done, total int)
}

// NMFOptions returns the NMF settings of a training run: nmf.DefaultOptions(Groups) with the
// seed, and the restarts, iteration cap and tolerance where they are set.
func (opt TrainOptions) NMFOptions() nmf.Options {
	nopt := nmf.DefaultOptions(opt.Groups)
	nopt.Seed = opt.Seed
	if opt.Restarts > 0 {
		nopt.Restarts = opt.Restarts
	}
	if opt.MaxIterations > 0 {
		nopt.MaxIterations = opt.MaxIterations
	}
	if opt.Tolerance > 0 {
		nopt.Tolerance = opt.Tolerance
	}
	nopt.Progress = opt.Progress
	return nopt
}

// Leading and profile list lengths in the group summaries.
const (
	leadingWitnesses = 5
	profileReadings  = 10
	// profileConcentration is the least share of a reading's loading that must fall in one
	// group for the reading to count as that group's profile reading.
	profileConcentration = 0.6
)

// Train prepares c, learns a k-group model by masked NMF and summarises it. It returns the
// model message (ready for EncodeBundle) and the preparation it was learnt from.
//
// The learnt factors are rescaled so that a pure member of a group has a coefficient near 1 in
// it: W's column g is multiplied, and H's row g divided, by the mean coefficient s_g of the
// training witnesses whose largest coefficient is in g. This leaves W H unchanged and makes the
// NNLS coefficients of a placed witness comparable across groups, so that their normalised values
// read as mixture shares. Groups are then numbered G1..Gk by size, largest first.
func Train(c *collation.Collation, opt TrainOptions) (*pb.Model, *prepare.Prepared, error) {
	if opt.Prepare == (prepare.Options{}) {
		opt.Prepare = prepare.DefaultOptions()
	}
	if opt.Groups < 1 || opt.Groups > MaxGroups {
		return nil, nil, fmt.Errorf("groups is %d; expected a number of groups from 1 to %d", opt.Groups, MaxGroups)
	}
	p, err := prepare.Prepare(c, opt.Prepare)
	if err != nil {
		return nil, nil, fmt.Errorf("preparing collation: %w", err)
	}
	if opt.Groups > len(p.Train) {
		return nil, nil, fmt.Errorf("groups is %d but only %d witnesses are left to train on", opt.Groups, len(p.Train))
	}
	nopt := opt.NMFOptions()
	res, err := nmf.Factorize(p.X, p.M, nopt)
	if err != nil {
		return nil, nil, fmt.Errorf("learning groups: %w", err)
	}
	return assemble(p, res, opt, nopt), p, nil
}

func assemble(p *prepare.Prepared, res *nmf.Result, opt TrainOptions, nopt nmf.Options) *pb.Model {
	k := opt.Groups
	W := mat.DenseCopyOf(res.W)
	H := mat.DenseCopyOf(res.H)
	nr, _ := W.Dims()
	_, nt := H.Dims()

	// Rescale so that pure members have coefficient ~1, then order groups by size.
	best := make([]int, nt)
	for j := 0; j < nt; j++ {
		best[j] = argmax(mat.Col(nil, j, H))
	}
	size := make([]int, k)
	for g := 0; g < k; g++ {
		sum, n := 0.0, 0
		for j := 0; j < nt; j++ {
			if best[j] == g {
				sum += H.At(g, j)
				n++
			}
		}
		size[g] = n
		s := 0.0
		if n > 0 {
			s = sum / float64(n)
		} else {
			s = mat.Max(H.RowView(g))
		}
		if s > 0 {
			for r := 0; r < nr; r++ {
				W.Set(r, g, W.At(r, g)*s)
			}
			for j := 0; j < nt; j++ {
				H.Set(g, j, H.At(g, j)/s)
			}
		}
	}
	order := make([]int, k) // order[newIndex] = old column
	for g := range order {
		order[g] = g
	}
	sort.SliceStable(order, func(a, b int) bool { return size[order[a]] > size[order[b]] })

	c := p.Collation
	m := &pb.Model{
		CollationSha256: opt.CollationSHA256,
		Prepare:         &pb.PrepareSettings{MinSupport: int32(p.Options.MinSupport), MinCoverage: p.Options.MinCoverage, Idf: p.Options.IDF},
		Train:           &pb.TrainSettings{Seed: nopt.Seed, Restarts: int32(nopt.Restarts), MaxIterations: int32(nopt.MaxIterations), Tolerance: nopt.Tolerance, Init: nopt.Init},
		GroupCount:      int32(k),
		Profile:         make([]float64, nr*k),
	}
	for u := 0; u < c.NumUnits(); u++ {
		un := c.Unit(u)
		m.Units = append(m.Units, &pb.ModelUnit{Id: un.ID, Section: un.Section, Readings: append([]string(nil), un.Readings...),
			RowStart: int32(p.UnitRows[u][0]), RowEnd: int32(p.UnitRows[u][1])})
	}
	for _, row := range p.Rows {
		m.Rows = append(m.Rows, &pb.ProfileRow{Unit: int32(row.Unit), Reading: int32(row.Reading), Support: int32(row.Support), Weight: row.Weight})
	}
	for r := 0; r < nr; r++ {
		for g, old := range order {
			m.Profile[r*k+g] = W.At(r, old)
		}
	}
	ids := make([]string, k)
	for g := range ids {
		ids[g] = fmt.Sprintf("G%d", g+1)
	}

	// Training witnesses' shares (normalised H columns, in the new group order).
	shares := mat.NewDense(k, nt, nil)
	for j, w := range p.Train {
		tw := &pb.TrainingWitness{Witness: c.Witness(w), Shares: make([]float64, k), ExtantUnits: int32(c.Extant(w))}
		sum := 0.0
		for _, old := range order {
			sum += H.At(old, j)
		}
		for g, old := range order {
			if sum > 0 {
				tw.Shares[g] = H.At(old, j) / sum
			}
			shares.Set(g, j, tw.Shares[g])
		}
		if sum > 0 {
			tw.BestGroup = ids[argmax(tw.Shares)]
		}
		row := c.Row(w)
		tw.Cells = make([]int32, len(row))
		copy(tw.Cells, row)
		m.TrainingWitnesses = append(m.TrainingWitnesses, tw)
	}

	// Group summaries.
	for g := 0; g < k; g++ {
		gs := &pb.GroupSummary{Id: ids[g], Size: int32(size[order[g]])}
		idx := make([]int, nt)
		for j := range idx {
			idx[j] = j
		}
		sort.SliceStable(idx, func(a, b int) bool { return shares.At(g, idx[a]) > shares.At(g, idx[b]) })
		for _, j := range idx[:min(leadingWitnesses, nt)] {
			if shares.At(g, j) <= 0 {
				break
			}
			gs.LeadingWitnesses = append(gs.LeadingWitnesses, &pb.WitnessShare{Witness: c.Witness(p.Train[j]), Share: shares.At(g, j)})
		}
		type cand struct {
			row         int
			conc, value float64
		}
		var cands []cand
		for r := 0; r < nr; r++ {
			tot := 0.0
			for h := 0; h < k; h++ {
				tot += m.Profile[r*k+h]
			}
			v := m.Profile[r*k+g]
			if tot > 0 && v/tot >= profileConcentration {
				cands = append(cands, cand{r, v / tot, v})
			}
		}
		sort.SliceStable(cands, func(a, b int) bool { return cands[a].value*cands[a].conc > cands[b].value*cands[b].conc })
		for _, cd := range cands[:min(profileReadings, len(cands))] {
			row := p.Rows[cd.row]
			un := c.Unit(row.Unit)
			gs.ProfileReadings = append(gs.ProfileReadings, &pb.ProfileReading{Unit: un.ID, Reading: un.Readings[row.Reading], Concentration: cd.conc, Loading: cd.value})
		}
		m.Groups = append(m.Groups, gs)
	}

	// Set-aside report.
	sa := &pb.SetAsideReport{}
	for _, s := range p.Report.SingularReadings {
		sa.SingularReadings = append(sa.SingularReadings, &pb.SingularReadingNote{Unit: s.Unit, Reading: s.Reading, Witnesses: s.Witnesses})
	}
	for _, u := range p.Report.UninformativeUnits {
		sa.UninformativeUnits = append(sa.UninformativeUnits, &pb.UninformativeUnitNote{Unit: u.Unit, KeptReadings: int32(u.Kept), Reason: u.Reason})
	}
	for _, f := range p.Report.FragmentaryWitnesses {
		sa.FragmentaryWitnesses = append(sa.FragmentaryWitnesses, &pb.FragmentaryWitnessNote{Witness: f.Witness, ExtantUnits: int32(f.Extant), Coverage: f.Coverage})
	}
	m.SetAside = sa

	// Fit.
	norm := 0.0
	for r := 0; r < nr; r++ {
		for j := 0; j < nt; j++ {
			if p.M.At(r, j) != 0 {
				x := p.X.At(r, j)
				norm += x * x
			}
		}
	}
	m.Fit = &pb.FitSummary{Objective: res.Objective, Iterations: int32(res.Iterations), BestRestart: int32(res.Restart), ObjectiveHistory: res.History}
	if norm > 0 {
		m.Fit.RelativeError = math.Sqrt(res.Objective / norm)
	}
	return m
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

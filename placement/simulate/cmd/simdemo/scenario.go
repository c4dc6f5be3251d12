package main

import (
	"bytes"
	"fmt"
	"math/rand/v2"

	"strayleaf/placement/collation"
	"strayleaf/placement/simulate"
)

// The demo scenario (all invented; see testdata/demo/README.md): "The Lamp-Wardens' Rule", a
// treatise in six chapters on keeping the river beacons of the Vendle, copied in five
// scriptoria. The Hollinsgarth family (the mother house and its daughter houses at Quarrenby and
// Fennick) holds most of the copies; Marrowgate and Tarnholm copied from exemplars of their own.

// chapters are the section labels: the six chapters of the Rule.
var chapters = []string{"oil", "wick", "glass", "tower", "fog", "toll"}

// scriptoria name the groups, in family order.
var scriptoria = []string{"hollinsgarth", "quarrenby", "fennick", "marrowgate", "tarnholm"}

// libraries are the codes of the invented libraries that now hold the copies; a siglum is a
// library code and a shelf number (Kd14), a fragment's a code, "-f" and a number (Kd-f1).
var libraries = []string{"Ov", "Kd", "Bw", "Lm", "Ry", "Ht", "Cx", "Vn"}

// demoWitnesses is the number of copies simulated; len(fragmentPlans) of them are taken out of
// the collation and cut down to the fragments to place. demoUnits is the number of variation
// units.
const (
	demoWitnesses = 98
	demoUnits     = 240
)

// fragmentPlan says what each demo fragment is cut from and how.
type fragmentPlan struct {
	group int           // the scriptorium of the copy it is cut from; -1: any (used for the mixed copy)
	form  string        // simulate.FormLeaf, FormLeaves or FormScattered
	kind  simulate.Kind // kind of copy cut from
}

var fragmentPlans = []fragmentPlan{
	{0, simulate.FormLeaf, simulate.KindPure},
	{1, simulate.FormLeaf, simulate.KindPure},
	{2, simulate.FormLeaf, simulate.KindPure},
	{3, simulate.FormLeaves, simulate.KindPure},
	{4, simulate.FormLeaf, simulate.KindPure},
	{0, simulate.FormScattered, simulate.KindPure},
	{1, simulate.FormLeaves, simulate.KindPure},
	{-1, simulate.FormLeaf, simulate.KindMixed},
}

// demoConfig is the simulation behind the demo.
func demoConfig(seed uint64) simulate.Config {
	cfg := simulate.DefaultConfig()
	cfg.Seed = seed
	cfg.Witnesses = demoWitnesses
	cfg.Units = demoUnits
	cfg.Sections = len(chapters)
	cfg.SectionNames = chapters
	cfg.Readings = 4
	cfg.Families = []simulate.Family{{Groups: 3, Share: 0.6}, {Groups: 1, Share: 0.25}, {Groups: 1, Share: 0.15}}
	cfg.GroupNames = scriptoria
	cfg.FamilyDivergence = 0.15
	cfg.GroupDivergence = 0.08
	cfg.ScribalRate = 0.02
	cfg.CoincidentShare = 0.25
	cfg.Mixed = 0.05
	cfg.BlockMixed = 0.04
	cfg.Fragmentary = 0.05
	cfg.MixtureMin, cfg.MixtureMax = 0.2, 0.45
	cfg.FragmentMin, cfg.FragmentMax = 0.06, 0.25
	cfg.ScatteredShare = 0.2
	cfg.LacunaRuns = 0.8
	cfg.LacunaMaxLen = 12
	cfg.Labels = simulate.NewWordLabels(seed, chapters)
	return cfg
}

// demoFiles are the generated demo files.
type demoFiles struct {
	Collation, Fragments, Truth []byte
}

// generate makes the demo files for a seed.
func generate(seed uint64) (*demoFiles, error) {
	rng := simulate.NewRand(seed ^ 0xdeadbeefcafe) // the scenario's own draws, apart from the simulator's
	cfg := demoConfig(seed)
	cfg.Sigla = librarySigla(rng, demoWitnesses)
	tr, err := simulate.Simulate(cfg)
	if err != nil {
		return nil, fmt.Errorf("simulating the demo tradition: %w", err)
	}

	// Choose the copies the fragments are cut from.
	chosen := map[int]bool{}
	var held []string
	for i, fp := range fragmentPlans {
		var candidates []int
		for w, wt := range tr.Truth.Witnesses {
			if !chosen[w] && wt.Kind == fp.kind && (fp.group < 0 || wt.Group == fp.group) {
				candidates = append(candidates, w)
			}
		}
		if len(candidates) == 0 {
			return nil, fmt.Errorf("fragment %d: no %s copy of group %d left to cut", i+1, fp.kind, fp.group)
		}
		w := candidates[simulate.IntN(rng, len(candidates))]
		chosen[w] = true
		held = append(held, tr.Collation.Witness(w))
	}
	kept, out, err := tr.Split(held)
	if err != nil {
		return nil, err
	}

	// Cut them: out's witnesses are in collation order, so find each by siglum.
	var sigla []string
	var rows [][]int32
	var truths []simulate.WitnessTruth
	for i, fp := range fragmentPlans {
		w, _ := out.Collation.WitnessIndex(held[i])
		row := out.Collation.Row(w)
		nu := len(row)
		var cut []int32
		switch fp.form {
		case simulate.FormLeaf:
			cut = simulate.CutContiguous(row, 28+simulate.IntN(rng, 17), rng)
		case simulate.FormLeaves:
			// Two leaves of a quire that are not consecutive: one run in each half of the text.
			n1, n2 := 16+simulate.IntN(rng, 9), 16+simulate.IntN(rng, 9)
			s1 := simulate.IntN(rng, nu/2-n1+1)
			s2 := nu/2 + simulate.IntN(rng, nu-nu/2-n2+1)
			a, b := simulate.CutRange(row, s1, n1), simulate.CutRange(row, s2, n2)
			cut = a
			for u := range b {
				if b[u] != collation.Lacuna {
					cut[u] = b[u]
				}
			}
		case simulate.FormScattered:
			cut = simulate.CutScattered(row, 30+simulate.IntN(rng, 11), rng)
		}
		siglum := fmt.Sprintf("%s-f%d", libraries[simulate.IntN(rng, len(libraries))], i+1)
		ft, err := out.FragmentTruth(w, siglum, cut, fp.form)
		if err != nil {
			return nil, err
		}
		sigla = append(sigla, siglum)
		rows = append(rows, cut)
		truths = append(truths, ft)
	}
	frags, err := simulate.Rebuild(out.Collation, sigla, rows)
	if err != nil {
		return nil, err
	}

	truth := kept.Truth
	truth.Fragments = truths
	var files demoFiles
	var buf bytes.Buffer
	if err := collation.WriteCSV(&buf, kept.Collation); err != nil {
		return nil, err
	}
	files.Collation = bytes.Clone(buf.Bytes())
	buf.Reset()
	if err := collation.WriteCSV(&buf, frags); err != nil {
		return nil, err
	}
	files.Fragments = bytes.Clone(buf.Bytes())
	buf.Reset()
	if err := truth.Write(&buf); err != nil {
		return nil, err
	}
	files.Truth = bytes.Clone(buf.Bytes())
	return &files, nil
}

// librarySigla gives n distinct sigla: a library code and a shelf number from 1 to 99.
func librarySigla(rng *rand.Rand, n int) []string {
	seen := map[string]bool{}
	out := make([]string, 0, n)
	for len(out) < n {
		s := fmt.Sprintf("%s%d", libraries[simulate.IntN(rng, len(libraries))], 1+simulate.IntN(rng, 99))
		if !seen[s] {
			seen[s] = true
			out = append(out, s)
		}
	}
	return out
}

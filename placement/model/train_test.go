package model

import (
	"testing"

	"strayleaf/placement/cluster"
	"strayleaf/placement/collation"
	"strayleaf/placement/prepare"
	"strayleaf/placement/rank"
	"strayleaf/placement/simulate"
	pb "strayleaf/proto/strayleaf/v1"
)

// simulated returns a tradition from the simulator's defaults with the given size and seed.
func simulated(t testing.TB, seed uint64, witnesses, units int, families []simulate.Family) *simulate.Tradition {
	t.Helper()
	cfg := simulate.DefaultConfig()
	cfg.Seed = seed
	cfg.Witnesses = witnesses
	cfg.Units = units
	if families != nil {
		cfg.Families = families
	}
	tr, err := simulate.Simulate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return tr
}

func trainTruth(t testing.TB, tr *simulate.Tradition, k int, popt prepare.Options) (*Model, []int, []int) {
	t.Helper()
	m, p, err := Train(tr.Collation, TrainOptions{Groups: k, Prepare: popt, Seed: 7, Restarts: 2})
	if err != nil {
		t.Fatal(err)
	}
	dm, err := FromProto(m)
	if err != nil {
		t.Fatal(err)
	}
	truth, got := make([]int, 0, len(p.Train)), make([]int, 0, len(p.Train))
	for j, w := range p.Train {
		wt, ok := tr.Truth.Witness(tr.Collation.Witness(w))
		if !ok {
			t.Fatalf("no truth for %s", tr.Collation.Witness(w))
		}
		// The true group of a witness is the group with the largest true share of its descent
		// (its own group, except for a mixed or block-mixed witness that took more from the
		// other). A witness whose two largest true shares are within 0.1 of each other has no
		// single true group and is left out of the comparison.
		top := argmax(wt.Shares)
		second := 0.0
		for g, s := range wt.Shares {
			if g != top && s > second {
				second = s
			}
		}
		if wt.Shares[top]-second < 0.1 {
			continue
		}
		truth = append(truth, top)
		got = append(got, argmax(m.TrainingWitnesses[j].Shares))
	}
	return dm, truth, got
}

// Ground truth (the simulator): at the true number of groups the training witnesses' assignment
// agrees with the simulated groups, adjusted Rand index (Hubert & Arabie 1985) >= 0.9, on three
// traditions of different size.
func TestTrainRecoversSimulatedGroups(t *testing.T) {
	cases := []struct {
		name             string
		seed             uint64
		witnesses, units int
		families         []simulate.Family
	}{
		{"small", 11, 50, 150, []simulate.Family{{Groups: 1, Share: 0.4}, {Groups: 1, Share: 0.35}, {Groups: 1, Share: 0.25}}},
		{"medium", 12, 90, 250, nil},
		{"large", 13, 160, 300, []simulate.Family{{Groups: 2, Share: 0.4}, {Groups: 2, Share: 0.3}, {Groups: 1, Share: 0.15}, {Groups: 1, Share: 0.15}}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			tr := simulated(t, tc.seed, tc.witnesses, tc.units, tc.families)
			k := len(tr.Truth.Groups)
			_, truth, got := trainTruth(t, tr, k, prepare.DefaultOptions())
			ari, err := cluster.AdjustedRand(truth, got)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("%s: k=%d, %d training witnesses, ARI %.3f", tc.name, k, len(truth), ari)
			if ari < 0.9 {
				t.Errorf("adjusted Rand index %.3f < 0.9", ari)
			}

			// The rank rule recovers the simulated number of groups within one.
			p, err := prepare.Prepare(tr.Collation, prepare.DefaultOptions())
			if err != nil {
				t.Fatal(err)
			}
			res, err := rank.Sweep(p.X, p.M, max(2, k-2), k+2, 4, rank.SweepOptions(), nil)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("%s: rank rule recommends k = %d (%s)", tc.name, res.Recommended, res.Reason)
			if d := res.Recommended - k; d < -1 || d > 1 {
				t.Errorf("rank rule recommends k = %d for %d simulated groups", res.Recommended, k)
			}
		})
	}
}

// A tradition with one dominant family (60% of the witnesses in three close sub-groups): with IDF
// weighting no group is a phantom made of the family's common readings, i.e. a group whose
// leading witnesses are all mixed witnesses.
func TestNoPhantomGroupWithDominantFamily(t *testing.T) {
	cfg := simulate.DefaultConfig()
	cfg.Seed = 21
	cfg.Witnesses = 100
	cfg.Units = 250
	cfg.Mixed = 0.12
	tr, err := simulate.Simulate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	k := len(tr.Truth.Groups)
	m, _, _ := trainTruth(t, tr, k, prepare.DefaultOptions())
	for _, g := range m.Proto().Groups {
		pure := 0
		for _, l := range g.LeadingWitnesses {
			wt, _ := tr.Truth.Witness(l.Witness)
			if wt.Kind != simulate.KindMixed && wt.Kind != simulate.KindBlockMixed {
				pure++
			}
		}
		if pure == 0 {
			t.Errorf("group %s is a phantom: its leading witnesses %v are all mixed", g.Id, g.LeadingWitnesses)
		}
	}
}

// Bundles round-trip and refuse damage.
func TestBundleRoundTripAndDamage(t *testing.T) {
	tr := simulated(t, 5, 40, 80, nil)
	m, _, err := Train(tr.Collation, TrainOptions{Groups: 3, Seed: 1, Restarts: 1})
	if err != nil {
		t.Fatal(err)
	}
	b, err := EncodeBundle(m)
	if err != nil {
		t.Fatal(err)
	}
	b2, _ := EncodeBundle(m)
	if string(b) != string(b2) {
		t.Fatal("encoding is not deterministic")
	}
	dm, err := Decode(b)
	if err != nil {
		t.Fatal(err)
	}
	if dm.K() != 3 || len(dm.Proto().Rows) != len(m.Rows) {
		t.Fatalf("decoded model differs: k=%d rows=%d", dm.K(), len(dm.Proto().Rows))
	}
	// Flip one byte inside the model bytes: the checksum catches it.
	bad := append([]byte(nil), b...)
	bad[len(bad)/2] ^= 0x40
	if _, err := Decode(bad); err == nil {
		t.Fatal("damaged bundle decoded")
	}
	// Same seed, same model bytes.
	m2, _, err := Train(tr.Collation, TrainOptions{Groups: 3, Seed: 1, Restarts: 1})
	if err != nil {
		t.Fatal(err)
	}
	b3, _ := EncodeBundle(m2)
	if string(b3) != string(b) {
		t.Fatal("same seed gave a different model")
	}
}

// Placing a training witness's own readings puts it in the group training gave it.
func TestPlaceTrainingWitnessesAgreeWithTraining(t *testing.T) {
	tr := simulated(t, 9, 60, 150, nil)
	m, p, err := Train(tr.Collation, TrainOptions{Groups: len(tr.Truth.Groups), Seed: 3, Restarts: 1})
	if err != nil {
		t.Fatal(err)
	}
	dm, err := FromProto(m)
	if err != nil {
		t.Fatal(err)
	}
	ws := dm.Engine().NewWorkspace()
	agree := 0
	for j, w := range p.Train {
		var rs []Reading
		c := tr.Collation
		for u, r := range c.Row(w) {
			if r != collation.Lacuna {
				rs = append(rs, Reading{c.Unit(u).ID, c.Unit(u).Readings[r]})
			}
		}
		pl, err := dm.Place(c.Witness(w), rs, ws)
		if err != nil {
			t.Fatal(err)
		}
		sum := 0.0
		for _, g := range pl.Groups {
			if g.Share < 0 {
				t.Fatalf("negative share %v", g)
			}
			sum += g.Share
		}
		if sum < 1-1e-9 || sum > 1+1e-9 {
			t.Fatalf("shares sum to %v", sum)
		}
		if pl.BestGroup == m.TrainingWitnesses[j].BestGroup {
			agree++
		}
	}
	if float64(agree) < 0.95*float64(len(p.Train)) {
		t.Errorf("only %d of %d training witnesses placed in their training group", agree, len(p.Train))
	}
}

func TestPlaceInputErrors(t *testing.T) {
	tr := simulated(t, 5, 40, 80, nil)
	m, _, err := Train(tr.Collation, TrainOptions{Groups: 3, Seed: 1, Restarts: 1})
	if err != nil {
		t.Fatal(err)
	}
	dm, _ := FromProto(m)
	var kept []*pb.ModelUnit
	for _, u := range m.Units {
		if u.RowEnd > u.RowStart {
			kept = append(kept, u)
		}
	}
	u0 := kept[0].Id
	_, err = dm.Place("F1", []Reading{{u0, kept[0].Readings[0]}, {"no-such-unit", "x"}, {u0, "y"}}, nil)
	ie, ok := err.(*InputError)
	if !ok || len(ie.Violations) != 2 {
		t.Fatalf("want an InputError with 2 violations, got %v", err)
	}
	if ie.Violations[0].Field != "readings[1].unit" || ie.Violations[1].Field != "readings[2].unit" {
		t.Errorf("fields %q %q", ie.Violations[0].Field, ie.Violations[1].Field)
	}
	if _, err := dm.Place("F2", nil, nil); err == nil {
		t.Error("empty witness accepted")
	}
	// An unknown reading is accepted and reported.
	pl, err := dm.Place("F3", []Reading{{u0, "a-reading-nobody-has"}, {kept[1].Id, kept[1].Readings[0]}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(pl.UnknownReadings) != 1 || pl.UnknownReadings[0] != u0 {
		t.Errorf("unknown readings %v", pl.UnknownReadings)
	}
}

// A bundle claiming more groups than any model may have is refused before memory is taken for it.
func TestFromProtoRefusesTooManyGroups(t *testing.T) {
	m := &pb.Model{GroupCount: MaxGroups + 1, Units: []*pb.ModelUnit{{Id: "u1", Readings: []string{"a", "b"}, RowStart: 0, RowEnd: 1}},
		Rows: []*pb.ProfileRow{{Unit: 0, Reading: 0, Support: 2, Weight: 1}}, Profile: make([]float64, MaxGroups+1)}
	if _, err := FromProto(m); err == nil {
		t.Fatal("a model with too many groups was accepted")
	}
	if _, _, err := Train(simulated(t, 5, 40, 80, nil).Collation, TrainOptions{Groups: MaxGroups + 1}); err == nil {
		t.Fatal("training with too many groups was accepted")
	}
}

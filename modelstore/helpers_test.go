package modelstore

import (
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"strayleaf/placement/model"
	pb "strayleaf/proto/strayleaf/v1"
)

// synthSpec describes an invented model for tests: units with three readings each (rows
// 3u..3u+2), k groups G1..Gk, a profile from a seeded generator, and training witnesses.
type synthSpec struct {
	units, k, witnesses int
	seed                uint64
	// stamp, when > 0, replaces the random profile by one that encodes it: the row of reading r
	// (0, 1, 2) of any unit has stamp in column r mod k and zero elsewhere.
	stamp int
}

// synthModel builds the model message of spec. Everything in it is invented.
func synthModel(spec synthSpec) *pb.Model {
	rng := rand.New(rand.NewPCG(spec.seed, 0x5eed))
	k := spec.k
	m := &pb.Model{
		CollationSha256: fmt.Sprintf("synthetic-%d-%d", spec.seed, spec.stamp),
		Prepare:         &pb.PrepareSettings{MinSupport: 2, MinCoverage: 0.5, Idf: false},
		Train:           &pb.TrainSettings{Seed: spec.seed, Restarts: 1, MaxIterations: 10, Tolerance: 1e-6, Init: "random"},
		GroupCount:      int32(k),
		Fit:             &pb.FitSummary{Objective: 1.5 + float64(spec.seed%7), RelativeError: 0.25, Iterations: 10},
	}
	readings := []string{"a", "b", "c"}
	for u := 0; u < spec.units; u++ {
		m.Units = append(m.Units, &pb.ModelUnit{Id: fmt.Sprintf("u%04d", u+1), Readings: readings, RowStart: int32(3 * u), RowEnd: int32(3*u + 3)})
		for r := range readings {
			m.Rows = append(m.Rows, &pb.ProfileRow{Unit: int32(u), Reading: int32(r), Support: 2, Weight: 1})
		}
	}
	m.Profile = make([]float64, len(m.Rows)*k)
	for i := range m.Rows {
		for j := 0; j < k; j++ {
			if spec.stamp > 0 {
				if j == i%3%k {
					m.Profile[i*k+j] = float64(spec.stamp)
				}
			} else {
				m.Profile[i*k+j] = rng.Float64()
			}
		}
	}
	for g := 0; g < k; g++ {
		m.Groups = append(m.Groups, &pb.GroupSummary{Id: fmt.Sprintf("G%d", g+1), Size: 1})
	}
	for w := 0; w < spec.witnesses; w++ {
		tw := &pb.TrainingWitness{Witness: fmt.Sprintf("W%02d", w+1), Shares: make([]float64, k), BestGroup: "G1", ExtantUnits: int32(spec.units)}
		tw.Shares[0] = 1
		for u := 0; u < spec.units; u++ {
			tw.Cells = append(tw.Cells, int32(rng.IntN(4))-1)
		}
		m.TrainingWitnesses = append(m.TrainingWitnesses, tw)
	}
	return m
}

// synthBundle encodes synthModel(spec) as a bundle.
func synthBundle(t testing.TB, spec synthSpec) []byte {
	t.Helper()
	b, err := model.EncodeBundle(synthModel(spec))
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// smallBundle is a quick, distinct bundle for seed.
func smallBundle(t testing.TB, seed uint64) []byte {
	return synthBundle(t, synthSpec{units: 12, k: 3, witnesses: 4, seed: seed})
}

// openTestStore opens a new store under t.TempDir(); on cleanup it closes the store (if the
// test has not) and runs bbolt's consistency check on the file.
func openTestStore(t testing.TB, opt Options) (*Store, string) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "models.db")
	s, err := Open(path, opt)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		s.Close()
		checkBoltFile(t, path)
	})
	return s, path
}

// checkBoltFile runs tx.Check on the bbolt file at path.
func checkBoltFile(t testing.TB, path string) {
	t.Helper()
	db, err := bolt.Open(path, 0o600, &bolt.Options{ReadOnly: true, Timeout: time.Second})
	if err != nil {
		t.Errorf("reopening %s for the check: %v", path, err)
		return
	}
	defer db.Close()
	db.View(func(tx *bolt.Tx) error {
		for err := range tx.Check() {
			t.Errorf("bbolt check of %s: %v", path, err)
		}
		return nil
	})
}

// mustVerify runs Store.Verify and fails the test on any problem.
func mustVerify(t testing.TB, s *Store) VerifyReport {
	t.Helper()
	rep, err := s.Verify()
	if err != nil {
		t.Fatalf("verify: %v", err)
	}
	return rep
}

func mustPublish(t testing.TB, s *Store, name string, b []byte, meta PublishMeta) Ref {
	t.Helper()
	r, err := s.Publish(name, b, meta)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

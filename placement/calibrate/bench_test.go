package calibrate

import (
	"testing"
	"time"

	"strayleaf/placement/model"
	"strayleaf/placement/simulate"
)

// benchTradition is a tradition of the size the speed goals name: 300 witnesses, 750 units of 4
// readings (about 3,000 kept readings), 12 groups.
func benchTradition(b *testing.B) *simulate.Tradition {
	b.Helper()
	cfg := simulate.DefaultConfig()
	cfg.Seed, cfg.Witnesses, cfg.Units, cfg.Sections = 31, 300, 750, 6
	cfg.Families = []simulate.Family{{Groups: 3, Share: 0.3}, {Groups: 3, Share: 0.3}, {Groups: 2, Share: 0.2}, {Groups: 2, Share: 0.1}, {Groups: 1, Share: 0.05}, {Groups: 1, Share: 0.05}}
	cfg.Fragmentary = 0
	tr, err := simulate.Simulate(cfg)
	if err != nil {
		b.Fatal(err)
	}
	return tr
}

// BenchmarkTrainCalibrated measures training alone and training with calibration (defaults) on
// the benchmark tradition, and reports their ratio.
func BenchmarkTrainCalibrated(b *testing.B) {
	tr := benchTradition(b)
	opt := model.TrainOptions{Groups: 12, Seed: 1}
	var plain, calibrated time.Duration
	b.Run("train", func(b *testing.B) {
		start := time.Now()
		for i := 0; i < b.N; i++ {
			m, _, err := model.Train(tr.Collation, opt)
			if err != nil {
				b.Fatal(err)
			}
			b.Logf("train iterations %d", m.Fit.Iterations)
		}
		plain = time.Since(start) / time.Duration(b.N)
	})
	b.Run("train+calibrate", func(b *testing.B) {
		start := time.Now()
		var rep *Report
		for i := 0; i < b.N; i++ {
			var err error
			if _, rep, err = Train(tr.Collation, opt, Options{Seed: 1}); err != nil {
				b.Fatal(err)
			}
		}
		calibrated = time.Since(start) / time.Duration(b.N)
		b.ReportMetric(rep.ECE, "ECE")
		b.ReportMetric(float64(rep.Samples), "fragments")
		b.ReportMetric(rep.RefitSeconds, "refit_s")
		b.ReportMetric(rep.FragmentSeconds, "fragment_s")
		b.ReportMetric(rep.TrainSeconds, "train_s")
		b.Logf("fold iterations %v; calibration %.2fs", rep.FoldIterations, rep.CalibrationSeconds)
		if plain > 0 {
			b.ReportMetric(float64(calibrated)/float64(plain), "x_train")
		}
	})
}

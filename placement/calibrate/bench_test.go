//go:build unix

package calibrate

import (
	"fmt"
	"syscall"
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

// BenchmarkTrainCalibrated measures training alone and training with calibration (default
// options) on the benchmark tradition, with one NMF start (the package default) and with four
// (the CLI's default), and reports the time calibration adds as a multiple of training's.
// Goal: at most 3x.
func BenchmarkTrainCalibrated(b *testing.B) {
	tr := benchTradition(b)
	for _, restarts := range []int{1, 4} {
		opt := model.TrainOptions{Groups: 12, Seed: 1, Restarts: restarts}
		var plain, plainCPU time.Duration
		b.Run(fmt.Sprintf("restarts=%d/train", restarts), func(b *testing.B) {
			start, cpu := time.Now(), cpuTime()
			for i := 0; i < b.N; i++ {
				if _, _, err := model.Train(tr.Collation, opt); err != nil {
					b.Fatal(err)
				}
			}
			plain = time.Since(start) / time.Duration(b.N)
			plainCPU = (cpuTime() - cpu) / time.Duration(b.N)
			b.ReportMetric(plainCPU.Seconds(), "cpu_s")
		})
		b.Run(fmt.Sprintf("restarts=%d/train+calibrate", restarts), func(b *testing.B) {
			var rep *Report
			var added time.Duration
			cpu := cpuTime()
			for i := 0; i < b.N; i++ {
				var err error
				if _, rep, err = Train(tr.Collation, opt, Options{Seed: 1}); err != nil {
					b.Fatal(err)
				}
				added += time.Duration(rep.CalibrationSeconds * float64(time.Second))
			}
			added /= time.Duration(b.N)
			totalCPU := (cpuTime() - cpu) / time.Duration(b.N)
			b.ReportMetric(totalCPU.Seconds(), "cpu_s")
			if plainCPU > 0 {
				b.ReportMetric(float64(totalCPU-plainCPU)/float64(plainCPU), "added_cpu_x_train")
			}
			b.ReportMetric(rep.ECE, "ECE")
			b.ReportMetric(float64(rep.Samples), "fragments")
			b.ReportMetric(rep.RefitSeconds, "refit_s")
			b.ReportMetric(rep.FragmentSeconds, "fragment_s")
			if plain > 0 {
				b.ReportMetric(float64(added)/float64(plain), "added_x_train")
			}
		})
	}
}

// cpuTime is the user and system CPU time of the process so far.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

package simulate

import "testing"

// BenchmarkSimulateLarge simulates a large tradition: 500 witnesses at 1000 units.
func BenchmarkSimulateLarge(b *testing.B) {
	cfg := DefaultConfig()
	cfg.Witnesses = 500
	cfg.Units = 1000
	cfg.Sections = 10
	for b.Loop() {
		if _, err := Simulate(cfg); err != nil {
			b.Fatal(err)
		}
	}
}

// Command simdemo makes the demo data in testdata/demo: an invented tradition simulated with
// package simulate, the fragments to place, and the truth behind both.
//
//	go run ./placement/simulate/cmd/simdemo -seed 1311 -out testdata/demo
//
// It writes collation.csv, fragments.csv and truth.json into the out folder (README.md there is
// written by hand). The same seed gives the same bytes.
package main

import (
	"flag"
	"fmt"
	"os"
	"path/filepath"

	"strayleaf"
)

func main() {
	seed := flag.Uint64("seed", strayleaf.DemoSeed, "seed of the simulation")
	out := flag.String("out", "testdata/demo", "folder to write collation.csv, fragments.csv and truth.json into")
	flag.Parse()
	if err := run(*seed, *out); err != nil {
		fmt.Fprintln(os.Stderr, "simdemo:", err)
		os.Exit(1)
	}
}

func run(seed uint64, dir string) error {
	files, err := generate(seed)
	if err != nil {
		return err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("making the demo folder: %w", err)
	}
	for name, data := range map[string][]byte{
		"collation.csv": files.Collation,
		"fragments.csv": files.Fragments,
		"truth.json":    files.Truth,
	} {
		if err := os.WriteFile(filepath.Join(dir, name), data, 0o644); err != nil {
			return fmt.Errorf("writing the demo: %w", err)
		}
	}
	return nil
}

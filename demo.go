package strayleaf

import _ "embed"

// The demo: an invented tradition (see testdata/demo/README.md), simulated with package
// placement/simulate by
//
//	go run ./placement/simulate/cmd/simdemo -seed 1311 -out testdata/demo
//
// A test regenerates it and checks it against these files, so they never drift.

// DemoSeed is the seed the demo files were generated with.
const DemoSeed uint64 = 1311

// DemoDescription says in one line what the demo holds.
const DemoDescription = "The Lamp-Wardens' Rule, an invented treatise in six chapters: 90 copies from five invented scriptoria collated at 240 variation units, and 8 fragments to place (simulated, seed 1311)."

// DemoCollation is the demo collation in the long CSV form (witness,unit,reading,section).
//
//go:embed testdata/demo/collation.csv
var DemoCollation []byte

// DemoFragments are the demo fragments to place, in the same CSV form.
//
//go:embed testdata/demo/fragments.csv
var DemoFragments []byte

// DemoTruth is the simulation truth behind the demo, as JSON (package placement/simulate, Truth).
//
//go:embed testdata/demo/truth.json
var DemoTruth []byte

// DemoReadme describes the demo scenario and files.
//
//go:embed testdata/demo/README.md
var DemoReadme []byte

package api

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"fmt"

	"strayleaf"
	"strayleaf/modelstore"
	"strayleaf/placement/calibrate"
	"strayleaf/placement/collation"
	"strayleaf/placement/model"
)

// Demo model settings: the demo tradition was copied in five scriptoria (testdata/demo).
const (
	DemoModelName = "demo"
	demoGroups    = 5
	demoRestarts  = 4
)

// TrainDemo trains and calibrates a model on the embedded demo collation and returns its bundle.
func TrainDemo() ([]byte, error) {
	c, err := collation.ReadCSV(bytes.NewReader(strayleaf.DemoCollation), "demo collation")
	if err != nil {
		return nil, fmt.Errorf("reading the demo collation: %w", err)
	}
	sum := sha256.Sum256(strayleaf.DemoCollation)
	m, _, err := calibrate.Train(c, model.TrainOptions{Groups: demoGroups, Seed: strayleaf.DemoSeed, Restarts: demoRestarts,
		CollationSHA256: hex.EncodeToString(sum[:])}, calibrate.Options{Seed: strayleaf.DemoSeed})
	if err != nil {
		return nil, fmt.Errorf("training the demo model: %w", err)
	}
	return model.EncodeBundle(m)
}

// seedDemo publishes the demo model as "demo" (alias "current") if the store has no models.
// It reports whether it did.
func seedDemo(st *modelstore.Store) (modelstore.Ref, bool, error) {
	list, err := st.List()
	if err != nil {
		return modelstore.Ref{}, false, err
	}
	if len(list) > 0 {
		return modelstore.Ref{}, false, nil
	}
	b, err := TrainDemo()
	if err != nil {
		return modelstore.Ref{}, false, err
	}
	r, err := st.Publish(DemoModelName, b, modelstore.PublishMeta{By: "strayleafd --demo", Note: strayleaf.DemoDescription, Alias: modelstore.DefaultAlias})
	if err != nil {
		return modelstore.Ref{}, false, fmt.Errorf("publishing the demo model: %w", err)
	}
	return r, true, nil
}

package main

import (
	"fmt"

	"strayleaf/modelstore"
	"strayleaf/placement/model"
)

// loadFromStore opens a local store read-only and returns the model ref resolves to, with the
// resolved name@version, and a function that closes the store.
func loadFromStore(path, ref string) (*model.Model, string, func(), error) {
	st, err := modelstore.Open(path, modelstore.Options{ReadOnly: true})
	if err != nil {
		return nil, "", nil, err
	}
	m, r, err := st.Model(ref)
	if err != nil {
		st.Close()
		return nil, "", nil, fmt.Errorf("store %s: %w", path, err)
	}
	return m, r.String(), func() { st.Close() }, nil
}

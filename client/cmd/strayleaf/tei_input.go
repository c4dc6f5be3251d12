package main

import (
	"bytes"

	"strayleaf/placement/collation"
	"strayleaf/placement/tei"
)

func readTEI(b []byte, name string) (*collation.Collation, error) {
	c, _, err := tei.Read(bytes.NewReader(b), name, tei.Options{})
	return c, err
}

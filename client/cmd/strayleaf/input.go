package main

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"strayleaf/placement/collation"
)

// collationSource is a collation read from a file, with the SHA-256 of the file's bytes.
type collationSource struct {
	Path   string
	SHA256 string
	C      *collation.Collation
}

// readCollation reads a collation file. The format is "csv", "tei", or "" to choose by the
// extension (.xml and .tei are TEI, everything else the long CSV form).
func readCollation(path, format string) (*collationSource, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return parseCollation(b, path, format)
}

func parseCollation(b []byte, name, format string) (*collationSource, error) {
	sum := sha256.Sum256(b)
	if format == "" {
		switch strings.ToLower(filepath.Ext(name)) {
		case ".xml", ".tei":
			format = "tei"
		default:
			format = "csv"
		}
	}
	var c *collation.Collation
	var err error
	switch format {
	case "csv":
		c, err = collation.ReadCSV(strings.NewReader(string(b)), name)
	case "tei":
		c, err = readTEI(b, name)
	default:
		return nil, fmt.Errorf("--format %q: expected csv or tei", format)
	}
	if err != nil {
		return nil, err
	}
	return &collationSource{Path: name, SHA256: hex.EncodeToString(sum[:]), C: c}, nil
}

// writeJSON writes v as one line of JSON.
func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetEscapeHTML(false)
	return enc.Encode(v)
}

// usageError reports bad command-line use; it exits with status 2.
func usageError(fsName, format string, args ...any) error {
	return fmt.Errorf("%s: %s (see --help)", fsName, fmt.Sprintf(format, args...))
}

func sha256Hex(b []byte) string {
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:])
}

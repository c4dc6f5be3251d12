package main

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"strayleaf/placement/collation"
	"strayleaf/placement/tei"
)

// collationSource is a collation read from a file, with the SHA-256 of the file's bytes.
type collationSource struct {
	Path   string
	SHA256 string
	C      *collation.Collation
	// Format is "csv" or "tei"; TEI is what the TEI reader found (nil for CSV) and MergeTypes
	// the reading types it was told to merge.
	Format     string
	TEI        *tei.Report
	MergeTypes []string
}

// readCollation reads a collation file with the default reading options. The format is "csv",
// "tei", or "" to choose by the extension (.xml and .tei are TEI, everything else the long CSV
// form).
func readCollation(path, format string) (*collationSource, error) {
	return readCollationWith(path, format, defaultCollationOptions())
}

// readCollationWith is readCollation with the options given on the command line.
func readCollationWith(path, format string, o *collationOptions) (*collationSource, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return parseCollationWith(b, path, format, o)
}

func parseCollation(b []byte, name, format string) (*collationSource, error) {
	return parseCollationWith(b, name, format, defaultCollationOptions())
}

func parseCollationWith(b []byte, name, format string, o *collationOptions) (*collationSource, error) {
	if o == nil {
		o = defaultCollationOptions()
	}
	sum := sha256.Sum256(b)
	if format == "" {
		switch strings.ToLower(filepath.Ext(name)) {
		case ".xml", ".tei":
			format = "tei"
		default:
			format = "csv"
		}
	}
	src := &collationSource{Path: name, SHA256: hex.EncodeToString(sum[:]), Format: format}
	var err error
	switch format {
	case "csv":
		src.C, err = collation.ReadCSV(bytes.NewReader(b), name)
	case "tei":
		src.MergeTypes = o.MergeTypes
		src.C, src.TEI, err = readTEI(b, name, o)
	default:
		return nil, fmt.Errorf("--format %q: expected csv or tei", format)
	}
	if err != nil {
		return nil, err
	}
	return src, nil
}

// writeJSON writes v as one line of JSON.
func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetEscapeHTML(false)
	return enc.Encode(v)
}

// usageErr is bad command-line use; the command exits with status 2.
type usageErr struct{ where, msg string }

func (e *usageErr) Error() string {
	if e.where == "" {
		return e.msg
	}
	return e.where + ": " + e.msg
}

// usageError reports bad command-line use; it exits with status 2. fsName is the command or
// subcommand ("place", "strayleaf models publish"); "" leaves naming it to the caller.
func usageError(fsName, format string, args ...any) error {
	return &usageErr{strings.TrimPrefix(fsName, "strayleaf "), fmt.Sprintf(format, args...) + " (see --help)"}
}

// parseFlags parses args into fs; a bad flag or flag value is a usage error (exit status 2),
// and --help is passed on as flag.ErrHelp.
func parseFlags(fs *flag.FlagSet, args []string) error {
	err := fs.Parse(args)
	if err == nil || errors.Is(err, flag.ErrHelp) {
		return err
	}
	return &usageErr{strings.TrimPrefix(fs.Name(), "strayleaf "), err.Error()}
}

func sha256Hex(b []byte) string {
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:])
}

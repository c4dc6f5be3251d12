package main

import (
	"bytes"
	"flag"
	"fmt"
	"strings"

	"strayleaf/placement/collation"
	"strayleaf/placement/tei"
)

// defaultMergeTypes are the reading @type values merged into their parent reading unless
// --merge-types says otherwise. Common practice: orthographic variants and nonsense readings
// (slips that make no sense) are not let split groups; they count as the reading they vary.
var defaultMergeTypes = []string{"orthographic", "nonsense"}

// collationOptions are the command-line settings for reading a collation.
type collationOptions struct {
	// MergeTypes are the TEI reading types merged into their parent reading.
	MergeTypes []string
	// SiglumAttr names the <witness> attribute that gives the siglum when present ("" for the
	// xml:id).
	SiglumAttr string
}

func defaultCollationOptions() *collationOptions {
	return &collationOptions{MergeTypes: append([]string(nil), defaultMergeTypes...)}
}

// addCollationFlags registers the collation-reading flags (--merge-types) on fs and returns the
// options they fill.
func addCollationFlags(fs *flag.FlagSet) *collationOptions {
	o := defaultCollationOptions()
	fs.Var((*mergeTypesFlag)(o), "merge-types",
		"TEI reading @type values merged into their parent reading, as comma-separated `TYPES`; orthographic and nonsense readings are merged by default, "+
			"since they are usually not let split groups; \"\" keeps every type a reading of its own")
	fs.StringVar(&o.SiglumAttr, "siglum-attr", "",
		"TEI <witness> `ATTRIBUTE` that gives the siglum when present, such as n (default: the xml:id; strayleaf's own TEI keeps sigla that are no XML names in n)")
	return o
}

// mergeTypesFlag is the --merge-types value: a comma-separated list of types.
type mergeTypesFlag collationOptions

func (f *mergeTypesFlag) String() string {
	if f == nil {
		return ""
	}
	return strings.Join(f.MergeTypes, ",")
}

func (f *mergeTypesFlag) Set(v string) error {
	f.MergeTypes = nil
	seen := map[string]bool{}
	for _, t := range strings.Split(v, ",") {
		t = strings.TrimSpace(t)
		if t == "" {
			continue
		}
		if strings.ContainsAny(t, " \t\n\r") {
			return fmt.Errorf("type %q holds white space; expected @type values such as orthographic", t)
		}
		if !seen[t] {
			seen[t] = true
			f.MergeTypes = append(f.MergeTypes, t)
		}
	}
	return nil
}

// teiOptions turns the command-line settings into the TEI reader's options.
func (o *collationOptions) teiOptions() tei.Options {
	opt := tei.Options{SiglumAttr: o.SiglumAttr}
	if len(o.MergeTypes) > 0 {
		opt.TypeActions = make(map[string]tei.Action, len(o.MergeTypes))
		for _, t := range o.MergeTypes {
			opt.TypeActions[t] = tei.Merge
		}
	}
	return opt
}

func readTEI(b []byte, name string, o *collationOptions) (*collation.Collation, *tei.Report, error) {
	return tei.Read(bytes.NewReader(b), name, o.teiOptions())
}

package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"os"
	"os/user"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"strayleaf/modelstore"
)

func init() {
	register(&command{name: "models", summary: "keep models in a versioned store: publish, list, show, alias, export, import, backup, history, delete", run: runModels})
}

// modelsBackend is what the models subcommands need from a model store. *modelstore.Store is the
// local one; a remote one (a strayleafd client) can stand in for it without touching the
// subcommands.
type modelsBackend interface {
	Publish(name string, bundle []byte, meta modelstore.PublishMeta) (modelstore.Ref, error)
	Import(r io.Reader, name string, meta modelstore.PublishMeta) (modelstore.Ref, error)
	List() ([]modelstore.ModelInfo, error)
	Describe(name string) (modelstore.ModelInfo, error)
	Info(ref string) (modelstore.VersionInfo, error)
	SetAlias(name, alias string, version int, by string) error
	RemoveAlias(name, alias, by string) error
	DeleteVersion(name string, version int, by string) error
	History(name string) ([]modelstore.Event, error)
	Export(ref string, w io.Writer) (modelstore.VersionInfo, error)
	Backup(w io.Writer) (int64, error)
	Verify() (modelstore.VerifyReport, error)
	Close() error
}

var _ modelsBackend = (*modelstore.Store)(nil)

// modelsSub is one models subcommand.
type modelsSub struct {
	name, synopsis, summary string
	run                     func(ctx context.Context, args []string, stdout, stderr io.Writer) error
}

func modelsSubs() []modelsSub {
	return []modelsSub{
		{"publish", "models publish --store DB --name NAME [--alias ALIAS] [--note TEXT] [--by WHO] [--json] BUNDLE", "store a bundle as the next version of a model", runModelsPublish},
		{"list", "models list --store DB [--json]", "list models, their versions and aliases", runModelsList},
		{"show", "models show --store DB [--json] REF", "describe one version (REF: name, name@3, name@alias)", runModelsShow},
		{"alias", "models alias --store DB [--by WHO] NAME ALIAS VERSION", "point an alias at a version", runModelsAlias},
		{"unalias", "models unalias --store DB [--by WHO] NAME ALIAS", "remove an alias", runModelsUnalias},
		{"delete", "models delete --store DB [--by WHO] NAME VERSION", "delete a version no alias points at", runModelsDelete},
		{"export", "models export --store DB --out FILE REF", "write a version's bundle to a file", runModelsExport},
		{"import", "models import --store DB [--name NAME] [--alias ALIAS] [--note TEXT] [--by WHO] [--json] FILE", "check a bundle file and store it as a new version", runModelsImport},
		{"backup", "models backup --store DB --out FILE", "copy the whole store to a file while it is in use", runModelsBackup},
		{"restore", "models restore --from BACKUP --store DB", "make a new store from a checked backup", runModelsRestore},
		{"history", "models history --store DB [--name NAME] [--json]", "list every publish, alias move and delete in order", runModelsHistory},
		{"verify", "models verify --store DB [--json]", "check the file and every version's checksum", runModelsVerify},
	}
}

func runModels(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	subs := modelsSubs()
	if len(args) == 0 || args[0] == "help" || args[0] == "-h" || args[0] == "--help" {
		w := stdout
		if len(args) == 0 {
			w = stderr
		}
		fmt.Fprintln(w, "Usage: strayleaf models SUBCOMMAND [flags]\n\nSubcommands:")
		for _, s := range subs {
			fmt.Fprintf(w, "  %-8s %s\n", s.name, s.summary)
		}
		fmt.Fprintln(w, "\nRun 'strayleaf models SUBCOMMAND --help' for its flags.")
		if len(args) == 0 {
			return usageError("models", "a subcommand is required")
		}
		return nil
	}
	for _, s := range subs {
		if s.name == args[0] {
			return s.run(ctx, args[1:], stdout, stderr)
		}
	}
	return usageError("models", "unknown subcommand %q", args[0])
}

// storeFlags are the flags that say which store to use and who is acting.
type storeFlags struct {
	fsName string
	store  *string
	by     *string
}

func addStoreFlags(fs *flag.FlagSet, withBy bool) *storeFlags {
	f := &storeFlags{fsName: fs.Name(), store: fs.String("store", "", "model store file (bbolt)")}
	if withBy {
		f.by = fs.String("by", defaultActor(), "who is acting, for the store's history")
	}
	return f
}

// open opens the store the flags name; readOnly for subcommands that only read, so that they can
// run beside other readers.
func (f *storeFlags) open(readOnly bool) (modelsBackend, error) {
	if *f.store == "" {
		return nil, usageError(f.fsName, "--store is required")
	}
	return modelstore.Open(*f.store, modelstore.Options{ReadOnly: readOnly, CacheBytes: -1})
}

func (f *storeFlags) actor() string {
	if f.by == nil {
		return ""
	}
	return *f.by
}

// defaultActor is the login name, for --by.
func defaultActor() string {
	if u, err := user.Current(); err == nil && u.Username != "" {
		return u.Username
	}
	if n := os.Getenv("USER"); n != "" {
		return n
	}
	return "unknown"
}

// parseModelsFlags parses flags that may stand before, between or after the positional
// arguments, and checks the count of positionals.
func parseModelsFlags(fs *flag.FlagSet, args []string, positional ...string) ([]string, error) {
	var pos []string
	for {
		if err := parseFlags(fs, args); err != nil {
			return nil, err
		}
		args = fs.Args()
		if len(args) == 0 {
			break
		}
		pos = append(pos, args[0])
		args = args[1:]
	}
	if len(pos) != len(positional) {
		if len(positional) == 0 {
			return nil, usageError(fs.Name(), "unexpected arguments %q", pos)
		}
		return nil, usageError(fs.Name(), "expected %s, got %d argument(s)", strings.Join(positional, " "), len(pos))
	}
	return pos, nil
}

func newModelsFlags(name string, stderr io.Writer) *flag.FlagSet {
	for _, s := range modelsSubs() {
		if s.name == name {
			fs := newFlags("models "+name, s.synopsis, stderr)
			usage := fs.Usage
			fs.Usage = func() {
				fmt.Fprintf(stderr, "%s.\n\n", upperFirst(s.summary))
				usage()
			}
			return fs
		}
	}
	panic("unknown models subcommand " + name)
}

func upperFirst(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}

// publishedJSON is what publish and import print with --json.
type publishedJSON struct {
	Ref     string                 `json:"ref"`
	Version modelstore.VersionInfo `json:"version"`
	Aliases map[string]int         `json:"aliases"`
}

func runModelsPublish(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newModelsFlags("publish", stderr)
	sf := addStoreFlags(fs, true)
	name := fs.String("name", "", "model name (letters, digits, '.', '_', '-')")
	alias := fs.String("alias", "", "also point this alias at the new version (a model's first version gets \"current\" anyway)")
	note := fs.String("note", "", "note kept with the version")
	asJSON := fs.Bool("json", false, "print the new version as JSON")
	pos, err := parseModelsFlags(fs, args, "BUNDLE")
	if err != nil {
		return err
	}
	if *name == "" {
		return usageError(fs.Name(), "--name is required")
	}
	b, err := os.ReadFile(pos[0])
	if err != nil {
		return err
	}
	st, err := sf.open(false)
	if err != nil {
		return err
	}
	defer st.Close()
	r, err := st.Publish(*name, b, modelstore.PublishMeta{By: sf.actor(), Note: *note, Alias: *alias})
	if err != nil {
		return err
	}
	return reportPublished(st, r, "published", *asJSON, stdout)
}

func runModelsImport(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newModelsFlags("import", stderr)
	sf := addStoreFlags(fs, true)
	name := fs.String("name", "", "model name (default: the file name without its extension and any @VERSION)")
	alias := fs.String("alias", "", "also point this alias at the new version")
	note := fs.String("note", "", "note kept with the version (default: where it was imported from)")
	asJSON := fs.Bool("json", false, "print the new version as JSON")
	pos, err := parseModelsFlags(fs, args, "FILE")
	if err != nil {
		return err
	}
	n := *name
	if n == "" {
		n = nameFromBundleFile(pos[0])
	}
	if *note == "" {
		*note = "imported from " + filepath.Base(pos[0])
	}
	f, err := os.Open(pos[0])
	if err != nil {
		return err
	}
	defer f.Close()
	st, err := sf.open(false)
	if err != nil {
		return err
	}
	defer st.Close()
	r, err := st.Import(f, n, modelstore.PublishMeta{By: sf.actor(), Note: *note, Alias: *alias})
	if err != nil {
		return fmt.Errorf("%s: %w", pos[0], err)
	}
	return reportPublished(st, r, "imported", *asJSON, stdout)
}

// nameFromBundleFile derives a model name from a bundle file name: "north@3.bundle" -> "north".
func nameFromBundleFile(path string) string {
	base := filepath.Base(path)
	if i := strings.IndexByte(base, '.'); i > 0 {
		base = base[:i]
	}
	if i := strings.IndexByte(base, '@'); i > 0 {
		base = base[:i]
	}
	return base
}

func reportPublished(st modelsBackend, r modelstore.Ref, verb string, asJSON bool, stdout io.Writer) error {
	info, err := st.Info(r.String())
	if err != nil {
		return err
	}
	mi, err := st.Describe(r.Name)
	if err != nil {
		return err
	}
	if asJSON {
		return writeJSON(stdout, publishedJSON{Ref: r.String(), Version: info, Aliases: mi.Aliases})
	}
	fmt.Fprintf(stdout, "%s %s (%d bytes, sha256 %s)\n", verb, r, info.Size, info.SHA256)
	if as := aliasesOf(mi, r.Version); len(as) > 0 {
		fmt.Fprintf(stdout, "aliases: %s\n", strings.Join(as, ", "))
	}
	return nil
}

// aliasesOf lists the aliases pointing at version, sorted.
func aliasesOf(mi modelstore.ModelInfo, version int) []string {
	var out []string
	for a, v := range mi.Aliases {
		if v == version {
			out = append(out, a)
		}
	}
	sort.Strings(out)
	return out
}

func runModelsList(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newModelsFlags("list", stderr)
	sf := addStoreFlags(fs, false)
	asJSON := fs.Bool("json", false, "print a JSON array of models")
	if _, err := parseModelsFlags(fs, args); err != nil {
		return err
	}
	st, err := sf.open(true)
	if err != nil {
		return err
	}
	defer st.Close()
	list, err := st.List()
	if err != nil {
		return err
	}
	if *asJSON {
		return writeJSON(stdout, list)
	}
	if len(list) == 0 {
		fmt.Fprintln(stdout, "no models")
		return nil
	}
	tw := tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "REF\tALIASES\tCREATED\tBY\tGROUPS\tUNITS\tROWS\tSIZE\tSHA256\tNOTE")
	for _, mi := range list {
		if len(mi.Versions) == 0 {
			fmt.Fprintf(tw, "%s\t(no versions left)\t\t\t\t\t\t\t\t\n", mi.Name)
		}
		for _, v := range mi.Versions {
			fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%d\t%d\t%d\t%d\t%s\t%s\n", v.Ref(), strings.Join(aliasesOf(mi, v.Version), ","),
				v.Created.Local().Format(time.DateTime), v.By, v.Summary.Groups, v.Summary.Units, v.Summary.Rows, v.Size, shortSHA(v.SHA256), oneLine(v.Note))
		}
	}
	return tw.Flush()
}

func shortSHA(s string) string {
	if len(s) > 12 {
		return s[:12]
	}
	return s
}

func oneLine(s string) string {
	s = strings.Join(strings.Fields(s), " ")
	if len(s) > 60 {
		s = s[:57] + "..."
	}
	return s
}

// showJSON is what show prints with --json.
type showJSON struct {
	Ref          string                 `json:"ref"`
	Version      modelstore.VersionInfo `json:"version"`
	Aliases      []string               `json:"aliases"`
	ModelAliases []modelstore.AliasInfo `json:"model_aliases"`
	Versions     []int                  `json:"model_versions"`
	History      []modelstore.Event     `json:"history"`
}

func runModelsShow(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newModelsFlags("show", stderr)
	sf := addStoreFlags(fs, false)
	asJSON := fs.Bool("json", false, "print one JSON object")
	pos, err := parseModelsFlags(fs, args, "REF")
	if err != nil {
		return err
	}
	st, err := sf.open(true)
	if err != nil {
		return err
	}
	defer st.Close()
	info, err := st.Info(pos[0])
	if err != nil {
		return err
	}
	mi, err := st.Describe(info.Name)
	if err != nil {
		return err
	}
	events, err := st.History(info.Name)
	if err != nil {
		return err
	}
	var mine []modelstore.Event
	for _, e := range events {
		if e.Version == info.Version || (e.Kind == modelstore.EventAlias && e.From == info.Version) {
			mine = append(mine, e)
		}
	}
	rep := showJSON{Ref: info.Ref().String(), Version: info, Aliases: aliasesOf(mi, info.Version), ModelAliases: mi.AliasDetails, History: mine}
	if rep.Aliases == nil {
		rep.Aliases = []string{}
	}
	if rep.History == nil {
		rep.History = []modelstore.Event{}
	}
	for _, v := range mi.Versions {
		rep.Versions = append(rep.Versions, v.Version)
	}
	if *asJSON {
		return writeJSON(stdout, rep)
	}
	s := info.Summary
	tw := tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "model\t%s\n", info.Ref())
	if pos[0] != info.Ref().String() {
		fmt.Fprintf(tw, "asked for\t%s\n", pos[0])
	}
	fmt.Fprintf(tw, "aliases here\t%s\n", orNone(strings.Join(rep.Aliases, ", ")))
	fmt.Fprintf(tw, "created\t%s by %s\n", info.Created.Local().Format(time.RFC3339), orNone(info.By))
	fmt.Fprintf(tw, "note\t%s\n", orNone(info.Note))
	fmt.Fprintf(tw, "bundle\t%d bytes, format %d, sha256 %s\n", info.Size, s.FormatVersion, info.SHA256)
	fmt.Fprintf(tw, "collation sha256\t%s\n", orNone(s.CollationSHA256))
	fmt.Fprintf(tw, "groups\t%d\n", s.Groups)
	fmt.Fprintf(tw, "units\t%d (%d kept readings)\n", s.Units, s.Rows)
	fmt.Fprintf(tw, "training witnesses\t%d\n", s.TrainingWitnesses)
	fmt.Fprintf(tw, "fit\tobjective %.6g, relative error %.4f\n", s.Objective, s.RelativeError)
	fmt.Fprintf(tw, "calibrated\t%v\n", s.Calibrated)
	vs := make([]string, len(rep.Versions))
	for i, v := range rep.Versions {
		vs[i] = strconv.Itoa(v)
	}
	fmt.Fprintf(tw, "versions of %s\t%s\n", info.Name, strings.Join(vs, ", "))
	for _, a := range mi.AliasDetails {
		fmt.Fprintf(tw, "alias %s\t-> %d (set %s by %s)\n", a.Alias, a.Version, a.Set.Local().Format(time.DateTime), orNone(a.By))
	}
	return tw.Flush()
}

func orNone(s string) string {
	if s == "" {
		return "-"
	}
	return s
}

func runModelsAlias(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newModelsFlags("alias", stderr)
	sf := addStoreFlags(fs, true)
	pos, err := parseModelsFlags(fs, args, "NAME", "ALIAS", "VERSION")
	if err != nil {
		return err
	}
	v, err := strconv.Atoi(strings.TrimPrefix(pos[2], "@"))
	if err != nil || v < 1 {
		return usageError(fs.Name(), "VERSION %q is not a version number", pos[2])
	}
	st, err := sf.open(false)
	if err != nil {
		return err
	}
	defer st.Close()
	before, err := st.Describe(pos[0])
	if err != nil {
		return err
	}
	if err := st.SetAlias(pos[0], pos[1], v, sf.actor()); err != nil {
		return err
	}
	if old, ok := before.Aliases[pos[1]]; ok && old != v {
		fmt.Fprintf(stdout, "%s@%s: %d -> %d\n", pos[0], pos[1], old, v)
	} else if ok {
		fmt.Fprintf(stdout, "%s@%s is already %d\n", pos[0], pos[1], v)
	} else {
		fmt.Fprintf(stdout, "%s@%s -> %d\n", pos[0], pos[1], v)
	}
	return nil
}

func runModelsUnalias(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newModelsFlags("unalias", stderr)
	sf := addStoreFlags(fs, true)
	pos, err := parseModelsFlags(fs, args, "NAME", "ALIAS")
	if err != nil {
		return err
	}
	st, err := sf.open(false)
	if err != nil {
		return err
	}
	defer st.Close()
	if err := st.RemoveAlias(pos[0], pos[1], sf.actor()); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "removed %s@%s\n", pos[0], pos[1])
	return nil
}

func runModelsDelete(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newModelsFlags("delete", stderr)
	sf := addStoreFlags(fs, true)
	pos, err := parseModelsFlags(fs, args, "NAME", "VERSION")
	if err != nil {
		return err
	}
	v, err := strconv.Atoi(strings.TrimPrefix(pos[1], "@"))
	if err != nil || v < 1 {
		return usageError(fs.Name(), "VERSION %q is not a version number", pos[1])
	}
	st, err := sf.open(false)
	if err != nil {
		return err
	}
	defer st.Close()
	if err := st.DeleteVersion(pos[0], v, sf.actor()); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "deleted %s\n", modelstore.Ref{Name: pos[0], Version: v})
	return nil
}

func runModelsExport(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newModelsFlags("export", stderr)
	sf := addStoreFlags(fs, false)
	out := fs.String("out", "", "bundle file to write")
	pos, err := parseModelsFlags(fs, args, "REF")
	if err != nil {
		return err
	}
	if *out == "" {
		return usageError(fs.Name(), "--out is required")
	}
	st, err := sf.open(true)
	if err != nil {
		return err
	}
	defer st.Close()
	var info modelstore.VersionInfo
	err = writeFileVia(*out, 0o644, func(w io.Writer) error {
		var err error
		info, err = st.Export(pos[0], w)
		return err
	})
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "exported %s to %s (%d bytes, sha256 %s)\n", info.Ref(), *out, info.Size, info.SHA256)
	return nil
}

func runModelsBackup(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newModelsFlags("backup", stderr)
	sf := addStoreFlags(fs, false)
	out := fs.String("out", "", "backup file to write")
	if _, err := parseModelsFlags(fs, args); err != nil {
		return err
	}
	if *out == "" {
		return usageError(fs.Name(), "--out is required")
	}
	if abs(*out) == abs(*sf.store) {
		return usageError(fs.Name(), "--out names the store itself")
	}
	st, err := sf.open(true)
	if err != nil {
		return err
	}
	defer st.Close()
	var n int64
	err = writeFileVia(*out, 0o600, func(w io.Writer) error {
		var err error
		n, err = st.Backup(w)
		return err
	})
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "backed up %s to %s (%d bytes)\n", *sf.store, *out, n)
	return nil
}

func abs(p string) string {
	if a, err := filepath.Abs(p); err == nil {
		return a
	}
	return p
}

func runModelsRestore(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newModelsFlags("restore", stderr)
	store := fs.String("store", "", "new model store file to make (must not exist)")
	from := fs.String("from", "", "backup file made by 'models backup'")
	if _, err := parseModelsFlags(fs, args); err != nil {
		return err
	}
	if *store == "" || *from == "" {
		return usageError(fs.Name(), "--store and --from are required")
	}
	if err := modelstore.Restore(*from, *store); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "restored %s from %s\n", *store, *from)
	return nil
}

func runModelsHistory(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newModelsFlags("history", stderr)
	sf := addStoreFlags(fs, false)
	name := fs.String("name", "", "only this model's events")
	asJSON := fs.Bool("json", false, "print a JSON array of events")
	if _, err := parseModelsFlags(fs, args); err != nil {
		return err
	}
	st, err := sf.open(true)
	if err != nil {
		return err
	}
	defer st.Close()
	events, err := st.History(*name)
	if err != nil {
		return err
	}
	if *asJSON {
		return writeJSON(stdout, events)
	}
	if len(events) == 0 {
		fmt.Fprintln(stdout, "no events")
		return nil
	}
	tw := tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "SEQ\tTIME\tEVENT\tREF\tBY\tDETAIL")
	for _, e := range events {
		ref := modelstore.Ref{Name: e.Name, Version: e.Version}.String()
		detail := e.Detail
		if e.Kind == modelstore.EventPublish || e.Kind == modelstore.EventImport || e.Kind == modelstore.EventDelete {
			detail = shortenSHA(detail)
		}
		fmt.Fprintf(tw, "%d\t%s\t%s\t%s\t%s\t%s\n", e.Seq, e.Time.Local().Format(time.DateTime), e.Kind, ref, orNone(e.By), detail)
	}
	return tw.Flush()
}

// shortenSHA cuts a "sha256 <64 hex>" in a history detail to its first 12 digits.
func shortenSHA(s string) string {
	const p = "sha256 "
	i := strings.Index(s, p)
	if i < 0 || len(s) < i+len(p)+64 {
		return s
	}
	return s[:i+len(p)+12] + s[i+len(p)+64:]
}

func runModelsVerify(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newModelsFlags("verify", stderr)
	sf := addStoreFlags(fs, false)
	asJSON := fs.Bool("json", false, "print the counts as JSON")
	if _, err := parseModelsFlags(fs, args); err != nil {
		return err
	}
	st, err := sf.open(true)
	if err != nil {
		return err
	}
	defer st.Close()
	rep, err := st.Verify()
	if err != nil {
		return err
	}
	if *asJSON {
		return writeJSON(stdout, rep)
	}
	fmt.Fprintf(stdout, "ok: %d models, %d versions (%d bundle bytes), %d history events; every checksum matches\n", rep.Models, rep.Versions, rep.Bytes, rep.Events)
	return nil
}

// writeFileVia streams write into a temporary file beside path, syncs it and renames it into
// place, so a failure never leaves a partial file under that name.
func writeFileVia(path string, perm os.FileMode, write func(io.Writer) error) (err error) {
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return err
	}
	tmp := f.Name()
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(tmp)
		}
	}()
	if err = f.Chmod(perm); err != nil {
		return err
	}
	if err = write(f); err != nil {
		return err
	}
	if err = f.Sync(); err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err = f.Close(); err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err = os.Rename(tmp, path); err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return nil
}

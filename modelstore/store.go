package modelstore

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"sort"
	"strings"
	"sync/atomic"
	"time"

	bolt "go.etcd.io/bbolt"
	berrors "go.etcd.io/bbolt/errors"

	"strayleaf/placement/model"
)

var (
	// ErrNotFound is returned (wrapped, naming what is missing) for an unknown model, version or
	// alias.
	ErrNotFound = errors.New("not found")
	// ErrAliased is returned when deleting a version an alias points at.
	ErrAliased = errors.New("version is aliased")
	// ErrReadOnly is returned by writing calls on a store opened read-only.
	ErrReadOnly = errors.New("model store is open read-only")
	// ErrInvalidName is returned for a malformed model name, alias or reference.
	ErrInvalidName = errors.New("invalid name")
	// ErrCorrupt is returned when stored bytes do not match their recorded SHA-256 or do not decode;
	// the message names the version.
	ErrCorrupt = errors.New("stored model is damaged")
	// ErrLocked is returned by Open when another process holds the store file past the lock
	// timeout.
	ErrLocked = errors.New("model store file is locked by another process")
	// ErrNotStore is returned by Open for a bbolt file that is not a model store, or one written
	// with a newer layout.
	ErrNotStore = errors.New("not a strayleaf model store")
)

// DefaultLockTimeout is how long Open waits for the file lock unless Options says otherwise.
const DefaultLockTimeout = time.Second

// DefaultCacheBytes bounds the decoded-model cache unless Options says otherwise.
const DefaultCacheBytes = 256 << 20

// Options tune Open. The zero value is a writable store with the defaults.
type Options struct {
	// ReadOnly opens the file with a shared lock, so that several reader processes can have it
	// open at once (while no writer does). Writing calls return ErrReadOnly.
	ReadOnly bool
	// LockTimeout is how long to wait for the file lock (default DefaultLockTimeout).
	LockTimeout time.Duration
	// CacheBytes bounds the decoded-model cache by the sum of model.SizeBytes (default
	// DefaultCacheBytes; negative keeps no decoded models).
	CacheBytes int64
	// MapBytes is the address space mapped for the file up front (default DefaultMapBytes). bbolt
	// must remap when the file outgrows its map, and a remap waits for every open read
	// transaction; while the file stays below MapBytes, a long read (a backup) never holds up a
	// writer. It costs address space only, not memory.
	MapBytes int
}

// DefaultMapBytes is the default Options.MapBytes.
const DefaultMapBytes = 1 << 30

// Store is a model store backed by one bbolt file. It is safe for concurrent use.
type Store struct {
	db       *bolt.DB
	path     string
	readOnly bool
	cache    *modelCache
	now      func() time.Time
	closed   atomic.Bool
}

// PublishMeta is what a publisher says about a new version.
type PublishMeta struct {
	// By is who publishes (recorded in the version and in history).
	By string `json:"by"`
	// Note is free text kept with the version.
	Note string `json:"note"`
	// Alias, when set, is moved to the new version in the same transaction. Whatever it says,
	// a model's first version also becomes its "current" unless the model already has one.
	Alias string `json:"alias,omitempty"`
}

// Summary is the training summary recorded with a version, read from the bundle at publish time.
type Summary struct {
	FormatVersion     int     `json:"format_version"`
	Groups            int     `json:"groups"`
	Units             int     `json:"units"`
	Rows              int     `json:"rows"`
	TrainingWitnesses int     `json:"training_witnesses"`
	Objective         float64 `json:"objective"`
	RelativeError     float64 `json:"relative_error"`
	CollationSHA256   string  `json:"collation_sha256"`
	Calibrated        bool    `json:"calibrated"`
}

// VersionInfo is the recorded metadata of one version.
type VersionInfo struct {
	Name    string    `json:"name"`
	Version int       `json:"version"`
	Created time.Time `json:"created"`
	By      string    `json:"by"`
	Note    string    `json:"note"`
	// SHA256 is the hex SHA-256 of the bundle bytes.
	SHA256  string  `json:"sha256"`
	Size    int     `json:"size"`
	Summary Summary `json:"summary"`
}

// Ref returns the version's reference.
func (v VersionInfo) Ref() Ref { return Ref{Name: v.Name, Version: v.Version} }

// AliasInfo says where an alias points, and who set it when.
type AliasInfo struct {
	Alias   string    `json:"alias"`
	Version int       `json:"version"`
	By      string    `json:"by"`
	Set     time.Time `json:"set"`
}

// ModelInfo describes one model: its versions in order and its aliases.
type ModelInfo struct {
	Name     string         `json:"name"`
	Versions []VersionInfo  `json:"versions"`
	Aliases  map[string]int `json:"aliases"`
	// AliasDetails are the aliases with who set them when, sorted by alias.
	AliasDetails []AliasInfo `json:"alias_details"`
}

// versionRecord is the stored JSON of a version's info key; name and version live in the keys.
type versionRecord struct {
	Created time.Time `json:"created"`
	By      string    `json:"by"`
	Note    string    `json:"note"`
	SHA256  string    `json:"sha256"`
	Size    int       `json:"size"`
	Summary Summary   `json:"summary"`
}

type aliasRecord struct {
	Version int       `json:"version"`
	By      string    `json:"by"`
	Set     time.Time `json:"set"`
}

// Open opens (creating it if needed and not read-only) the model store at path.
func Open(path string, opt Options) (*Store, error) {
	timeout := opt.LockTimeout
	if timeout <= 0 {
		timeout = DefaultLockTimeout
	}
	cacheBytes := opt.CacheBytes
	if cacheBytes == 0 {
		cacheBytes = DefaultCacheBytes
	}
	if opt.ReadOnly {
		if _, err := os.Stat(path); err != nil {
			return nil, fmt.Errorf("opening model store %s read-only: %w", path, err)
		}
	}
	mapBytes := opt.MapBytes
	if mapBytes <= 0 {
		mapBytes = DefaultMapBytes
	}
	db, err := bolt.Open(path, 0o600, &bolt.Options{Timeout: timeout, ReadOnly: opt.ReadOnly, InitialMmapSize: mapBytes})
	if err != nil {
		if errors.Is(err, berrors.ErrTimeout) {
			how := "for writing"
			if opt.ReadOnly {
				how = "read-only"
			}
			return nil, fmt.Errorf("opening model store %s %s: %w (waited %v): a writer needs the file to itself, readers may share it; stop the other process, or open read-only beside other readers: %w",
				path, how, ErrLocked, timeout, err)
		}
		return nil, fmt.Errorf("opening model store %s: %w", path, err)
	}
	s := &Store{db: db, path: path, readOnly: opt.ReadOnly, cache: newModelCache(cacheBytes), now: func() time.Time { return time.Now().UTC() }}
	if err := s.init(); err != nil {
		db.Close()
		return nil, fmt.Errorf("opening model store %s: %w", path, err)
	}
	return s, nil
}

// init checks the schema key, and on a new writable file creates the layout.
func (s *Store) init() error {
	check := func(tx *bolt.Tx) (fresh bool, err error) {
		meta := tx.Bucket(bucketMeta)
		if meta == nil {
			empty := true
			tx.ForEach(func([]byte, *bolt.Bucket) error { empty = false; return nil })
			if !empty {
				return false, fmt.Errorf("%w: the file holds other data and no %q bucket", ErrNotStore, bucketMeta)
			}
			return true, nil
		}
		v := meta.Get(keySchema)
		if len(v) != 4 {
			return false, fmt.Errorf("%w: no schema version key", ErrNotStore)
		}
		if sv := uint32(v[0])<<24 | uint32(v[1])<<16 | uint32(v[2])<<8 | uint32(v[3]); sv != SchemaVersion {
			return false, fmt.Errorf("%w: layout version %d; this build reads version %d", ErrNotStore, sv, SchemaVersion)
		}
		for _, b := range [][]byte{bucketModels, bucketHistory} {
			if tx.Bucket(b) == nil {
				return false, fmt.Errorf("%w: bucket %q missing", ErrNotStore, b)
			}
		}
		return false, nil
	}
	var fresh bool
	err := s.db.View(func(tx *bolt.Tx) error {
		var err error
		fresh, err = check(tx)
		return err
	})
	if err != nil || !fresh {
		return err
	}
	if s.readOnly {
		return fmt.Errorf("%w: the file is empty (open it writable once to create the store)", ErrNotStore)
	}
	return s.db.Update(func(tx *bolt.Tx) error {
		if fresh, err := check(tx); err != nil || !fresh {
			return err
		}
		meta, err := tx.CreateBucket(bucketMeta)
		if err != nil {
			return err
		}
		if err := meta.Put(keySchema, schemaBytes(SchemaVersion)); err != nil {
			return err
		}
		if err := meta.Put(keyCreated, []byte(s.now().Format(time.RFC3339Nano))); err != nil {
			return err
		}
		for _, b := range [][]byte{bucketModels, bucketHistory} {
			if _, err := tx.CreateBucket(b); err != nil {
				return err
			}
		}
		return nil
	})
}

// Close releases the file (waiting for reads under way). Models handed out stay usable; calls
// on the closed Store fail. Closing twice is harmless.
func (s *Store) Close() error {
	s.closed.Store(true)
	return s.db.Close()
}

// Path returns the store file's path.
func (s *Store) Path() string { return s.path }

// ReadOnly reports whether the store was opened read-only.
func (s *Store) ReadOnly() bool { return s.readOnly }

// CacheStats reports how many decoded models are cached and their accounted bytes.
func (s *Store) CacheStats() (models int, bytes int64) { return s.cache.stats() }

func (s *Store) writable(what string) error {
	if s.readOnly {
		return fmt.Errorf("%s: %w", what, ErrReadOnly)
	}
	return nil
}

// update runs a write transaction and, once it has committed (or failed), forgets cached
// reference resolutions.
func (s *Store) update(fn func(tx *bolt.Tx) error) error {
	err := s.db.Update(fn)
	s.cache.invalidateRefs()
	return err
}

func summarize(m *model.Model) Summary {
	p := m.Proto()
	return Summary{
		FormatVersion:     model.FormatVersion,
		Groups:            int(p.GroupCount),
		Units:             len(p.Units),
		Rows:              len(p.Rows),
		TrainingWitnesses: len(p.TrainingWitnesses),
		Objective:         p.GetFit().GetObjective(),
		RelativeError:     p.GetFit().GetRelativeError(),
		CollationSHA256:   p.CollationSha256,
		Calibrated:        p.Calibration != nil,
	}
}

// Publish stores bundle as the next version of the model name, atomically, and returns its
// reference. The bundle is fully decoded and validated first; nothing is stored if it fails.
// If the model has no "current" alias yet (its first version), the new version gets it;
// meta.Alias, if set, is moved to the new version in the same transaction.
func (s *Store) Publish(name string, bundle []byte, meta PublishMeta) (Ref, error) {
	return s.publish(name, bundle, meta, EventPublish, "")
}

func (s *Store) publish(name string, bundle []byte, meta PublishMeta, kind EventKind, detail string) (Ref, error) {
	what := fmt.Sprintf("publishing %s", name)
	if err := s.writable(what); err != nil {
		return Ref{}, err
	}
	if err := checkModelName(name); err != nil {
		return Ref{}, fmt.Errorf("%s: %w", what, err)
	}
	if meta.Alias != "" {
		if err := checkAliasName(meta.Alias); err != nil {
			return Ref{}, fmt.Errorf("%s: %w", what, err)
		}
	}
	m, err := model.Decode(bundle)
	if err != nil {
		return Ref{}, fmt.Errorf("%s: bundle refused: %w", what, err)
	}
	sum := sha256.Sum256(bundle)
	rec := versionRecord{Created: s.now(), By: meta.By, Note: meta.Note, SHA256: hex.EncodeToString(sum[:]), Size: len(bundle), Summary: summarize(m)}
	info, err := json.Marshal(rec)
	if err != nil {
		return Ref{}, fmt.Errorf("%s: %w", what, err)
	}
	var ref Ref
	err = s.update(func(tx *bolt.Tx) error {
		mb, err := tx.Bucket(bucketModels).CreateBucketIfNotExists([]byte(name))
		if err != nil {
			return err
		}
		next := 1
		if v := mb.Get(keyNext); v != nil {
			if next, err = parseVersionKey(v); err != nil {
				return fmt.Errorf("%w: model %s: next-version key: %v", ErrCorrupt, name, err)
			}
		}
		versions, err := mb.CreateBucketIfNotExists(bucketVersions)
		if err != nil {
			return err
		}
		aliases, err := mb.CreateBucketIfNotExists(bucketAliases)
		if err != nil {
			return err
		}
		vb, err := versions.CreateBucket(versionKey(next))
		if err != nil {
			// A version bucket that exists already is never written into.
			return fmt.Errorf("creating %s@%d: %w", name, next, err)
		}
		if err := vb.Put(keyBundle, bundle); err != nil {
			return err
		}
		if err := vb.Put(keyInfo, info); err != nil {
			return err
		}
		if err := mb.Put(keyNext, versionKey(next+1)); err != nil {
			return err
		}
		ref = Ref{Name: name, Version: next}
		if err := appendEvent(tx, Event{Time: rec.Created, Kind: kind, Name: name, Version: next, By: meta.By,
			Detail: strings.TrimSpace(fmt.Sprintf("sha256 %s, %d bytes %s", rec.SHA256, rec.Size, detail))}); err != nil {
			return err
		}
		moves := []string{}
		if meta.Alias != "" {
			moves = append(moves, meta.Alias)
		}
		if meta.Alias != DefaultAlias && aliases.Get([]byte(DefaultAlias)) == nil {
			moves = append(moves, DefaultAlias)
		}
		for _, a := range moves {
			if err := s.setAliasTx(tx, aliases, name, a, next, meta.By, rec.Created); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return Ref{}, fmt.Errorf("%s: %w", what, err)
	}
	s.cache.put(ref, m)
	return ref, nil
}

// setAliasTx points alias at version and records the move; a no-op when it already does.
func (s *Store) setAliasTx(tx *bolt.Tx, aliases *bolt.Bucket, name, alias string, version int, by string, at time.Time) error {
	from := 0
	if old := aliases.Get([]byte(alias)); old != nil {
		var rec aliasRecord
		if err := json.Unmarshal(old, &rec); err != nil {
			return fmt.Errorf("%w: alias %s@%s: %v", ErrCorrupt, name, alias, err)
		}
		if rec.Version == version {
			return nil
		}
		from = rec.Version
	}
	b, err := json.Marshal(aliasRecord{Version: version, By: by, Set: at})
	if err != nil {
		return err
	}
	if err := aliases.Put([]byte(alias), b); err != nil {
		return err
	}
	detail := fmt.Sprintf("%s@%s -> %d", name, alias, version)
	if from != 0 {
		detail = fmt.Sprintf("%s@%s %d -> %d", name, alias, from, version)
	}
	return appendEvent(tx, Event{Time: at, Kind: EventAlias, Name: name, Version: version, Alias: alias, From: from, By: by, Detail: detail})
}

// modelBucket returns the bucket of model name, or ErrNotFound.
func modelBucket(tx *bolt.Tx, name string) (*bolt.Bucket, error) {
	mb := tx.Bucket(bucketModels).Bucket([]byte(name))
	if mb == nil {
		return nil, fmt.Errorf("model %q: %w", name, ErrNotFound)
	}
	return mb, nil
}

// versionBucket returns the bucket of one version, or ErrNotFound naming it.
func versionBucket(mb *bolt.Bucket, name string, version int) (*bolt.Bucket, error) {
	var vb *bolt.Bucket
	if vs := mb.Bucket(bucketVersions); vs != nil {
		vb = vs.Bucket(versionKey(version))
	}
	if vb == nil {
		return nil, fmt.Errorf("model %q has no version %d: %w", name, version, ErrNotFound)
	}
	return vb, nil
}

// resolveTx resolves a parsed reference inside tx.
func resolveTx(tx *bolt.Tx, spec refSpec) (Ref, error) {
	mb, err := modelBucket(tx, spec.name)
	if err != nil {
		return Ref{}, err
	}
	v := spec.version
	if spec.alias != "" {
		var raw []byte
		if as := mb.Bucket(bucketAliases); as != nil {
			raw = as.Get([]byte(spec.alias))
		}
		if raw == nil {
			return Ref{}, fmt.Errorf("model %q has no alias %q: %w", spec.name, spec.alias, ErrNotFound)
		}
		var rec aliasRecord
		if err := json.Unmarshal(raw, &rec); err != nil {
			return Ref{}, fmt.Errorf("%w: alias %s@%s: %v", ErrCorrupt, spec.name, spec.alias, err)
		}
		v = rec.Version
	}
	if _, err := versionBucket(mb, spec.name, v); err != nil {
		return Ref{}, err
	}
	return Ref{Name: spec.name, Version: v}, nil
}

// Resolve turns "name", "name@3" or "name@alias" into a version reference. A bare name means
// name@current. Errors wrap ErrInvalidName or ErrNotFound and say what was missing.
func (s *Store) Resolve(ref string) (Ref, error) {
	spec, err := parseRef(ref)
	if err != nil {
		return Ref{}, err
	}
	var r Ref
	err = s.db.View(func(tx *bolt.Tx) error {
		r, err = resolveTx(tx, spec)
		return err
	})
	if err != nil {
		return Ref{}, fmt.Errorf("resolving %s: %w", ref, err)
	}
	return r, nil
}

// readVersion copies out the bundle bytes and info of a resolved version inside tx.
func readVersionTx(tx *bolt.Tx, r Ref) ([]byte, VersionInfo, error) {
	mb, err := modelBucket(tx, r.Name)
	if err != nil {
		return nil, VersionInfo{}, err
	}
	vb, err := versionBucket(mb, r.Name, r.Version)
	if err != nil {
		return nil, VersionInfo{}, err
	}
	info, err := decodeInfo(r, vb.Get(keyInfo))
	if err != nil {
		return nil, VersionInfo{}, err
	}
	raw := vb.Get(keyBundle)
	if raw == nil {
		return nil, VersionInfo{}, fmt.Errorf("%w: %s has no bundle", ErrCorrupt, r)
	}
	return append([]byte(nil), raw...), info, nil
}

func decodeInfo(r Ref, raw []byte) (VersionInfo, error) {
	if raw == nil {
		return VersionInfo{}, fmt.Errorf("%w: %s has no metadata", ErrCorrupt, r)
	}
	var rec versionRecord
	if err := json.Unmarshal(raw, &rec); err != nil {
		return VersionInfo{}, fmt.Errorf("%w: %s metadata: %v", ErrCorrupt, r, err)
	}
	return VersionInfo{Name: r.Name, Version: r.Version, Created: rec.Created, By: rec.By, Note: rec.Note,
		SHA256: rec.SHA256, Size: rec.Size, Summary: rec.Summary}, nil
}

// verifyBytes checks stored bundle bytes against their recorded size and SHA-256.
func verifyBytes(b []byte, info VersionInfo) error {
	sum := sha256.Sum256(b)
	got := hex.EncodeToString(sum[:])
	if got != info.SHA256 || len(b) != info.Size {
		return fmt.Errorf("%w: %s fails its checksum: recorded sha256 %s (%d bytes), stored bytes hash to %s (%d bytes)",
			ErrCorrupt, info.Ref(), info.SHA256, info.Size, got, len(b))
	}
	return nil
}

// Bundle returns the bundle bytes of a version, checked against their recorded SHA-256, and the
// version's metadata.
func (s *Store) Bundle(ref string) ([]byte, VersionInfo, error) {
	spec, err := parseRef(ref)
	if err != nil {
		return nil, VersionInfo{}, err
	}
	var b []byte
	var info VersionInfo
	err = s.db.View(func(tx *bolt.Tx) error {
		r, err := resolveTx(tx, spec)
		if err != nil {
			return err
		}
		b, info, err = readVersionTx(tx, r)
		return err
	})
	if err != nil {
		return nil, VersionInfo{}, fmt.Errorf("reading %s: %w", ref, err)
	}
	if err := verifyBytes(b, info); err != nil {
		return nil, VersionInfo{}, err
	}
	return b, info, nil
}

// Model returns the decoded model a reference resolves to, and the version it resolved to. The
// model is shared and immutable. On a cache miss the bundle is read, its SHA-256 checked and it
// is decoded once for all concurrent callers.
func (s *Store) Model(ref string) (*model.Model, Ref, error) {
	if s.closed.Load() {
		return nil, Ref{}, fmt.Errorf("reading %s: %w", ref, berrors.ErrDatabaseNotOpen)
	}
	if m, r, ok := s.cache.lookup(ref); ok {
		return m, r, nil
	}
	gen := s.cache.generation()
	r, err := s.Resolve(ref)
	if err != nil {
		return nil, Ref{}, err
	}
	m, err := s.cache.load(r, func() (*model.Model, error) { return s.loadModel(r) })
	if err != nil {
		return nil, Ref{}, err
	}
	s.cache.rememberRef(ref, r, gen)
	return m, r, nil
}

// loadModel reads, verifies and decodes version r, bypassing the cache.
func (s *Store) loadModel(r Ref) (*model.Model, error) {
	var b []byte
	var info VersionInfo
	err := s.db.View(func(tx *bolt.Tx) error {
		var err error
		b, info, err = readVersionTx(tx, r)
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("loading %s: %w", r, err)
	}
	if err := verifyBytes(b, info); err != nil {
		return nil, err
	}
	m, err := model.Decode(b)
	if err != nil {
		return nil, fmt.Errorf("%w: %s passes its checksum but does not decode: %w", ErrCorrupt, r, err)
	}
	return m, nil
}

// versionsTx lists the versions of one model bucket in order.
func versionsTx(mb *bolt.Bucket, name string) ([]VersionInfo, error) {
	out := []VersionInfo{}
	vs := mb.Bucket(bucketVersions)
	if vs == nil {
		return out, nil
	}
	c := vs.Cursor()
	for k, v := c.First(); k != nil; k, v = c.Next() {
		if v != nil {
			return nil, fmt.Errorf("%w: model %s: stray key %x among versions", ErrCorrupt, name, k)
		}
		ver, err := parseVersionKey(k)
		if err != nil {
			return nil, fmt.Errorf("%w: model %s: %v", ErrCorrupt, name, err)
		}
		info, err := decodeInfo(Ref{Name: name, Version: ver}, vs.Bucket(k).Get(keyInfo))
		if err != nil {
			return nil, err
		}
		out = append(out, info)
	}
	return out, nil
}

func aliasesTx(mb *bolt.Bucket, name string) ([]AliasInfo, error) {
	out := []AliasInfo{}
	as := mb.Bucket(bucketAliases)
	if as == nil {
		return out, nil
	}
	err := as.ForEach(func(k, v []byte) error {
		var rec aliasRecord
		if err := json.Unmarshal(v, &rec); err != nil {
			return fmt.Errorf("%w: alias %s@%s: %v", ErrCorrupt, name, k, err)
		}
		out = append(out, AliasInfo{Alias: string(k), Version: rec.Version, By: rec.By, Set: rec.Set})
		return nil
	})
	return out, err
}

func modelInfoTx(mb *bolt.Bucket, name string) (ModelInfo, error) {
	vs, err := versionsTx(mb, name)
	if err != nil {
		return ModelInfo{}, err
	}
	as, err := aliasesTx(mb, name)
	if err != nil {
		return ModelInfo{}, err
	}
	mi := ModelInfo{Name: name, Versions: vs, Aliases: make(map[string]int, len(as)), AliasDetails: as}
	for _, a := range as {
		mi.Aliases[a.Alias] = a.Version
	}
	return mi, nil
}

// List describes every model, by name.
func (s *Store) List() ([]ModelInfo, error) {
	out := []ModelInfo{}
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketModels).ForEachBucket(func(k []byte) error {
			mi, err := modelInfoTx(tx.Bucket(bucketModels).Bucket(k), string(k))
			if err != nil {
				return err
			}
			out = append(out, mi)
			return nil
		})
	})
	if err != nil {
		return nil, fmt.Errorf("listing models: %w", err)
	}
	return out, nil
}

// Describe returns one model's versions and aliases.
func (s *Store) Describe(name string) (ModelInfo, error) {
	var mi ModelInfo
	err := s.db.View(func(tx *bolt.Tx) error {
		mb, err := modelBucket(tx, name)
		if err != nil {
			return err
		}
		mi, err = modelInfoTx(mb, name)
		return err
	})
	if err != nil {
		return ModelInfo{}, fmt.Errorf("describing %s: %w", name, err)
	}
	return mi, nil
}

// Versions lists the versions of one model in order.
func (s *Store) Versions(name string) ([]VersionInfo, error) {
	mi, err := s.Describe(name)
	if err != nil {
		return nil, err
	}
	return mi.Versions, nil
}

// Info returns the metadata of the version ref resolves to (without reading the bundle).
func (s *Store) Info(ref string) (VersionInfo, error) {
	spec, err := parseRef(ref)
	if err != nil {
		return VersionInfo{}, err
	}
	var info VersionInfo
	err = s.db.View(func(tx *bolt.Tx) error {
		r, err := resolveTx(tx, spec)
		if err != nil {
			return err
		}
		mb, _ := modelBucket(tx, r.Name)
		vb, _ := versionBucket(mb, r.Name, r.Version)
		info, err = decodeInfo(r, vb.Get(keyInfo))
		return err
	})
	if err != nil {
		return VersionInfo{}, fmt.Errorf("reading %s: %w", ref, err)
	}
	return info, nil
}

// SetAlias points alias of model name at version, atomically, recording who moved it. Setting
// an alias to the version it already names changes nothing and records nothing.
func (s *Store) SetAlias(name, alias string, version int, by string) error {
	what := fmt.Sprintf("setting %s@%s to %d", name, alias, version)
	if err := s.writable(what); err != nil {
		return err
	}
	if err := checkModelName(name); err != nil {
		return fmt.Errorf("%s: %w", what, err)
	}
	if err := checkAliasName(alias); err != nil {
		return fmt.Errorf("%s: %w", what, err)
	}
	err := s.update(func(tx *bolt.Tx) error {
		mb, err := modelBucket(tx, name)
		if err != nil {
			return err
		}
		if _, err := versionBucket(mb, name, version); err != nil {
			return err
		}
		aliases, err := mb.CreateBucketIfNotExists(bucketAliases)
		if err != nil {
			return err
		}
		return s.setAliasTx(tx, aliases, name, alias, version, by, s.now())
	})
	if err != nil {
		return fmt.Errorf("%s: %w", what, err)
	}
	return nil
}

// RemoveAlias removes an alias of model name, recording who removed it.
func (s *Store) RemoveAlias(name, alias, by string) error {
	what := fmt.Sprintf("removing %s@%s", name, alias)
	if err := s.writable(what); err != nil {
		return err
	}
	if err := checkAliasName(alias); err != nil {
		return fmt.Errorf("%s: %w", what, err)
	}
	err := s.update(func(tx *bolt.Tx) error {
		mb, err := modelBucket(tx, name)
		if err != nil {
			return err
		}
		as := mb.Bucket(bucketAliases)
		var raw []byte
		if as != nil {
			raw = as.Get([]byte(alias))
		}
		if raw == nil {
			return fmt.Errorf("model %q has no alias %q: %w", name, alias, ErrNotFound)
		}
		var rec aliasRecord
		if err := json.Unmarshal(raw, &rec); err != nil {
			return fmt.Errorf("%w: alias %s@%s: %v", ErrCorrupt, name, alias, err)
		}
		if err := as.Delete([]byte(alias)); err != nil {
			return err
		}
		return appendEvent(tx, Event{Time: s.now(), Kind: EventUnalias, Name: name, Version: rec.Version, Alias: alias, From: rec.Version, By: by,
			Detail: fmt.Sprintf("%s@%s (was %d) removed", name, alias, rec.Version)})
	})
	if err != nil {
		return fmt.Errorf("%s: %w", what, err)
	}
	return nil
}

// DeleteVersion removes one version for good. It is refused with ErrAliased while any alias
// points at the version. The version number is never given out again.
func (s *Store) DeleteVersion(name string, version int, by string) error {
	r := Ref{Name: name, Version: version}
	what := fmt.Sprintf("deleting %s", r)
	if err := s.writable(what); err != nil {
		return err
	}
	err := s.update(func(tx *bolt.Tx) error {
		mb, err := modelBucket(tx, name)
		if err != nil {
			return err
		}
		vb, err := versionBucket(mb, name, version)
		if err != nil {
			return err
		}
		as, err := aliasesTx(mb, name)
		if err != nil {
			return err
		}
		var pointing []string
		for _, a := range as {
			if a.Version == version {
				pointing = append(pointing, a.Alias)
			}
		}
		if len(pointing) > 0 {
			sort.Strings(pointing)
			if len(pointing) == 1 {
				return fmt.Errorf("%w: alias %s points at it; move or remove the alias first", ErrAliased, pointing[0])
			}
			return fmt.Errorf("%w: aliases %s point at it; move or remove them first", ErrAliased, strings.Join(pointing, ", "))
		}
		info, err := decodeInfo(r, vb.Get(keyInfo))
		if err != nil {
			return err
		}
		if err := mb.Bucket(bucketVersions).DeleteBucket(versionKey(version)); err != nil {
			return err
		}
		return appendEvent(tx, Event{Time: s.now(), Kind: EventDelete, Name: name, Version: version, By: by,
			Detail: fmt.Sprintf("sha256 %s, %d bytes", info.SHA256, info.Size)})
	})
	if err != nil {
		return fmt.Errorf("%s: %w", what, err)
	}
	s.cache.drop(r)
	return nil
}

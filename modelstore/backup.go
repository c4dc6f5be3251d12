package modelstore

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"

	bolt "go.etcd.io/bbolt"

	"strayleaf/placement/model"
)

// MaxBundleBytes bounds a bundle read by Import.
const MaxBundleBytes = 1 << 30

// Export writes the bundle bytes of a version, checked against their SHA-256, to w: the same
// bytes Import takes back, with the same checksum.
func (s *Store) Export(ref string, w io.Writer) (VersionInfo, error) {
	b, info, err := s.Bundle(ref)
	if err != nil {
		return VersionInfo{}, err
	}
	if _, err := w.Write(b); err != nil {
		return VersionInfo{}, fmt.Errorf("exporting %s: %w", info.Ref(), err)
	}
	return info, nil
}

// Import reads a bundle from r, verifies it (format version, checksum, structure) and stores it
// as the next version of model name, exactly as read. A name is required: a bundle does not
// carry one (the CLI derives one from the file name).
func (s *Store) Import(r io.Reader, name string, meta PublishMeta) (Ref, error) {
	if err := s.writable("importing a bundle"); err != nil {
		return Ref{}, err
	}
	if name == "" {
		return Ref{}, fmt.Errorf("importing a bundle: %w: a model name is required", ErrInvalidName)
	}
	b, err := io.ReadAll(io.LimitReader(r, MaxBundleBytes+1))
	if err != nil {
		return Ref{}, fmt.Errorf("importing %s: reading the bundle: %w", name, err)
	}
	if len(b) > MaxBundleBytes {
		return Ref{}, fmt.Errorf("importing %s: the bundle exceeds %d bytes", name, MaxBundleBytes)
	}
	return s.publish(name, b, meta, EventImport, "imported")
}

// Backup writes a consistent copy of the whole store file to w while the store stays in use: it
// is one read transaction (tx.WriteTo), so it sees every version committed before it began and
// none after. Writers go on meanwhile as long as the file stays below Options.MapBytes; past
// that, a write that must grow the map waits for the backup to finish. It returns the bytes
// written.
func (s *Store) Backup(w io.Writer) (int64, error) {
	var n int64
	err := s.db.View(func(tx *bolt.Tx) error {
		var err error
		n, err = tx.WriteTo(w)
		return err
	})
	if err != nil {
		return n, fmt.Errorf("backing up %s: %w", s.path, err)
	}
	return n, nil
}

// BackupFile writes a backup to path through a temporary file in the same folder, synced and
// renamed into place, so a crash never leaves a partial backup under that name.
func (s *Store) BackupFile(path string) (int64, error) {
	var n int64
	err := writeFileSynced(path, func(f *os.File) error {
		var err error
		n, err = s.Backup(f)
		return err
	}, true)
	return n, err
}

// Restore makes a new store file at path from a backup file, after checking the backup: bbolt's
// consistency check, the layout version, and every version's checksum and decoding. It refuses
// to overwrite an existing file.
func Restore(backupPath, path string) error {
	if _, err := os.Stat(path); err == nil {
		return fmt.Errorf("restoring %s to %s: the target exists; move it away first", backupPath, path)
	} else if !errors.Is(err, os.ErrNotExist) {
		return fmt.Errorf("restoring %s to %s: %w", backupPath, path, err)
	}
	src, err := Open(backupPath, Options{ReadOnly: true, CacheBytes: -1})
	if err != nil {
		return fmt.Errorf("restoring from %s: %w", backupPath, err)
	}
	if _, err := src.Verify(); err != nil {
		src.Close()
		return fmt.Errorf("restoring from %s: the backup fails its checks: %w", backupPath, err)
	}
	err = writeFileSynced(path, func(f *os.File) error {
		_, err := src.Backup(f)
		return err
	}, false)
	if cerr := src.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("restoring from %s: %w", backupPath, err)
	}
	return nil
}

// writeFileSynced writes path through a synced temporary file in the same folder. With replace
// false the final step fails if path has appeared meanwhile.
func writeFileSynced(path string, write func(*os.File) error, replace bool) error {
	dir := filepath.Dir(path)
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return err
	}
	tmp := f.Name()
	ok := false
	defer func() {
		if !ok {
			f.Close()
			os.Remove(tmp)
		}
	}()
	if err := f.Chmod(0o600); err != nil {
		return err
	}
	if err := write(f); err != nil {
		return err
	}
	if err := f.Sync(); err != nil {
		return err
	}
	if err := f.Close(); err != nil {
		return err
	}
	if replace {
		err = os.Rename(tmp, path)
	} else {
		// A hard link never replaces an existing name.
		if err = os.Link(tmp, path); err == nil {
			os.Remove(tmp)
		}
	}
	if err != nil {
		return err
	}
	ok = true
	if d, err := os.Open(dir); err == nil {
		d.Sync()
		d.Close()
	}
	return nil
}

// VerifyReport counts what Verify checked.
type VerifyReport struct {
	Models   int   `json:"models"`
	Versions int   `json:"versions"`
	Bytes    int64 `json:"bundle_bytes"`
	Events   int   `json:"events"`
}

// Verify checks the whole store: bbolt's page-level consistency check (tx.Check), every version's
// SHA-256 and decoding, that every alias points at a version, and that the history reads back.
// All problems found are joined into the error.
func (s *Store) Verify() (VerifyReport, error) {
	var rep VerifyReport
	var problems []error
	// tx.Check on a read transaction is only safe with no writer at work; on a writable store run
	// it in a write transaction that is rolled back.
	checkTx := func(tx *bolt.Tx) {
		for err := range tx.Check() {
			problems = append(problems, fmt.Errorf("bbolt check: %w", err))
		}
	}
	if s.readOnly {
		if err := s.db.View(func(tx *bolt.Tx) error { checkTx(tx); return nil }); err != nil {
			return rep, err
		}
	} else {
		tx, err := s.db.Begin(true)
		if err != nil {
			return rep, fmt.Errorf("verifying %s: %w", s.path, err)
		}
		checkTx(tx)
		tx.Rollback()
	}
	err := s.db.View(func(tx *bolt.Tx) error {
		models := tx.Bucket(bucketModels)
		return models.ForEachBucket(func(k []byte) error {
			name := string(k)
			rep.Models++
			mb := models.Bucket(k)
			mi, err := modelInfoTx(mb, name)
			if err != nil {
				problems = append(problems, err)
				return nil
			}
			next := 1
			if v := mb.Get(keyNext); v != nil {
				if next, err = parseVersionKey(v); err != nil {
					problems = append(problems, fmt.Errorf("%w: model %s: next-version key: %v", ErrCorrupt, name, err))
				}
			}
			have := map[int]bool{}
			for _, vi := range mi.Versions {
				rep.Versions++
				have[vi.Version] = true
				if vi.Version >= next {
					problems = append(problems, fmt.Errorf("%w: %s is not below the next version number %d", ErrCorrupt, vi.Ref(), next))
				}
				b, info, err := readVersionTx(tx, vi.Ref())
				if err == nil {
					rep.Bytes += int64(len(b))
					err = verifyBytes(b, info)
				}
				if err == nil {
					if _, derr := model.Decode(b); derr != nil {
						err = fmt.Errorf("%w: %s passes its checksum but does not decode: %w", ErrCorrupt, vi.Ref(), derr)
					}
				}
				if err != nil {
					problems = append(problems, err)
				}
			}
			for _, a := range mi.AliasDetails {
				if !have[a.Version] {
					problems = append(problems, fmt.Errorf("%w: alias %s@%s points at missing version %d", ErrCorrupt, name, a.Alias, a.Version))
				}
			}
			return nil
		})
	})
	if err != nil {
		problems = append(problems, err)
	}
	if ev, err := s.History(""); err != nil {
		problems = append(problems, err)
	} else {
		rep.Events = len(ev)
		for i, e := range ev {
			if e.Seq != uint64(i+1) {
				problems = append(problems, fmt.Errorf("%w: history entry %d has sequence %d", ErrCorrupt, i+1, e.Seq))
				break
			}
		}
	}
	if len(problems) > 0 {
		return rep, fmt.Errorf("verifying %s: %w", s.path, errors.Join(problems...))
	}
	return rep, nil
}

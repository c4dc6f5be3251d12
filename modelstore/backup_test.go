package modelstore

import (
	"bytes"
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"
)

// TestBackupWhileWriting takes a hot backup while a writer publishes and moves aliases, restores
// it, and checks that the restored store passes tx.Check and Verify and holds every version
// committed before the backup began, byte for byte.
func TestBackupWhileWriting(t *testing.T) {
	s, _ := openTestStore(t, Options{})
	bundles := make([][]byte, 40)
	for i := range bundles {
		bundles[i] = synthBundle(t, synthSpec{units: 10 + 15*(i%5), k: 3, witnesses: 2, seed: uint64(i + 1)})
	}
	var mu sync.Mutex
	var committed []VersionInfo
	stop := make(chan struct{})
	started := make(chan struct{})
	writerErr := make(chan error, 1)
	go func() {
		defer close(writerErr)
		for i := 0; ; i++ {
			select {
			case <-stop:
				return
			default:
			}
			name := []string{"north", "south"}[i%2]
			r, err := s.Publish(name, bundles[i%len(bundles)], PublishMeta{By: "writer", Alias: "candidate"})
			if err != nil {
				writerErr <- err
				return
			}
			info, err := s.Info(r.String())
			if err != nil {
				writerErr <- err
				return
			}
			mu.Lock()
			committed = append(committed, info)
			if len(committed) == 6 {
				close(started)
			}
			mu.Unlock()
		}
	}()
	select {
	case <-started:
	case err := <-writerErr:
		t.Fatalf("writer stopped: %v", err)
	}
	mu.Lock()
	before := append([]VersionInfo(nil), committed...)
	mu.Unlock()
	// The backup's writer holds the backup open until the writer has committed two more
	// versions, so that the copy certainly runs while writes go on.
	backup := filepath.Join(t.TempDir(), "backup.db")
	f, err := os.Create(backup)
	if err != nil {
		t.Fatal(err)
	}
	during := 0
	w := &waitingWriter{w: f, wait: func() {
		mu.Lock()
		target := len(committed) + 2
		mu.Unlock()
		deadline := time.Now().Add(30 * time.Second)
		for {
			if time.Now().After(deadline) {
				t.Errorf("the writer committed nothing while the backup ran: is it blocked by the backup's read transaction?")
				return
			}
			mu.Lock()
			k := len(committed)
			mu.Unlock()
			if k >= target {
				during = k - len(before)
				return
			}
			select {
			case err := <-writerErr:
				t.Errorf("writer stopped: %v", err)
				return
			case <-time.After(2 * time.Millisecond):
			}
		}
	}}
	n, err := s.Backup(w)
	if err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	close(stop)
	if err := <-writerErr; err != nil {
		t.Fatalf("writer: %v", err)
	}
	if during < 2 {
		t.Fatalf("only %d versions were committed while the backup ran", during)
	}
	if st, err := os.Stat(backup); err != nil || st.Size() != n {
		t.Fatalf("backup file: %v, size vs reported %d", err, n)
	}

	restored := filepath.Join(t.TempDir(), "restored.db")
	if err := Restore(backup, restored); err != nil {
		t.Fatal(err)
	}
	checkBoltFile(t, restored)
	r, err := Open(restored, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	rep := mustVerify(t, r)
	if rep.Versions < len(before) {
		t.Errorf("restored store holds %d versions; %d were committed before the backup", rep.Versions, len(before))
	}
	for _, want := range before {
		b, info, err := r.Bundle(want.Ref().String())
		if err != nil {
			t.Errorf("%s, committed before the backup, is not in the restored store: %v", want.Ref(), err)
			continue
		}
		if info.SHA256 != want.SHA256 || info.Created != want.Created {
			t.Errorf("%s restored with other metadata: %+v vs %+v", want.Ref(), info, want)
		}
		orig, _, err := s.Bundle(want.Ref().String())
		if err != nil || !bytes.Equal(orig, b) {
			t.Errorf("%s restored with other bytes (%v)", want.Ref(), err)
		}
	}
	// Restore never overwrites a file.
	if err := Restore(backup, restored); err == nil || !strings.Contains(err.Error(), "exists") {
		t.Errorf("restoring over an existing file = %v; expected a refusal", err)
	}
}

func TestRestoreRefusesDamagedBackup(t *testing.T) {
	s, _ := openTestStore(t, Options{})
	victim := synthBundle(t, synthSpec{units: 100, k: 3, seed: 3})
	mustPublish(t, s, "m", victim, PublishMeta{})
	dir := t.TempDir()
	backup := filepath.Join(dir, "backup.db")
	if _, err := s.BackupFile(backup); err != nil {
		t.Fatal(err)
	}
	file, err := os.ReadFile(backup)
	if err != nil {
		t.Fatal(err)
	}
	i := bytes.Index(file, victim)
	if i < 0 {
		t.Fatal("bundle not found in the backup")
	}
	file[i+len(victim)/2] ^= 0x04
	if err := os.WriteFile(backup, file, 0o600); err != nil {
		t.Fatal(err)
	}
	target := filepath.Join(dir, "restored.db")
	err = Restore(backup, target)
	if !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), "m@1") {
		t.Errorf("restoring a damaged backup = %v; expected ErrCorrupt naming m@1", err)
	}
	if _, err := os.Stat(target); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("a refused restore left %s behind", target)
	}
}

// waitingWriter calls wait once, before the first write.
type waitingWriter struct {
	w      io.Writer
	wait   func()
	waited bool
}

func (w *waitingWriter) Write(p []byte) (int, error) {
	if !w.waited {
		w.waited = true
		w.wait()
	}
	return w.w.Write(p)
}

package modelstore

import (
	"bufio"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"strayleaf/placement/model"
)

// crashWriterEnv, when set in the environment of the test binary, makes it run
// runCrashWriter on the store file it names instead of the tests (see TestMain).
const crashWriterEnv = "STRAYLEAF_MODELSTORE_CRASH_WRITER"

func TestMain(m *testing.M) {
	if path := os.Getenv(crashWriterEnv); path != "" {
		seed, _ := strconv.ParseUint(os.Getenv(crashWriterEnv+"_SEED"), 10, 64)
		if err := runCrashWriter(path, seed); err != nil {
			fmt.Fprintln(os.Stderr, "crash writer:", err)
			os.Exit(3)
		}
		os.Exit(0)
	}
	os.Exit(m.Run())
}

// runCrashWriter publishes versions of model "crash" in a loop until killed, moving an alias and
// deleting old versions as it goes. After each committed step it prints a line the parent reads:
// "ready", "published V SHA", "deleting V", "deleted V".
func runCrashWriter(path string, seed uint64) error {
	s, err := Open(path, Options{LockTimeout: 5 * time.Second, CacheBytes: -1})
	if err != nil {
		return err
	}
	out := bufio.NewWriter(os.Stdout)
	say := func(format string, args ...any) {
		fmt.Fprintf(out, format+"\n", args...)
		out.Flush()
	}
	say("ready")
	rng := rand.New(rand.NewPCG(seed, 77))
	for i := 0; ; i++ {
		// Sizes from a fraction of a page to many pages, so that kills land in small and large
		// writes alike.
		spec := synthSpec{units: 5 + rng.IntN(400), k: 2 + rng.IntN(4), witnesses: rng.IntN(4), seed: seed*1000 + uint64(i)}
		b, err := model.EncodeBundle(synthModel(spec))
		if err != nil {
			return err
		}
		meta := PublishMeta{By: "crash-writer", Note: fmt.Sprintf("round %d step %d", seed, i)}
		if i%3 == 0 {
			meta.Alias = "candidate"
		}
		r, err := s.Publish("crash", b, meta)
		if err != nil {
			return err
		}
		info, err := s.Info(r.String())
		if err != nil {
			return err
		}
		say("published %d %s", r.Version, info.SHA256)
		if i%4 == 3 {
			if err := s.SetAlias("crash", DefaultAlias, r.Version, "crash-writer"); err != nil {
				return err
			}
		}
		if i%2 == 1 {
			// Delete the oldest version no alias points at.
			mi, err := s.Describe("crash")
			if err != nil {
				return err
			}
			aliased := map[int]bool{}
			for _, v := range mi.Aliases {
				aliased[v] = true
			}
			for _, vi := range mi.Versions {
				if !aliased[vi.Version] {
					say("deleting %d", vi.Version)
					if err := s.DeleteVersion("crash", vi.Version, "crash-writer"); err != nil {
						return err
					}
					say("deleted %d", vi.Version)
					break
				}
			}
		}
	}
}

// TestCrashSafety kills a child process that publishes in a loop with SIGKILL at random moments,
// 24 times over one store file, half of the times soon after it opened the store, half
// while it is well into its loop. After each kill the store must open, pass tx.Check, and every
// listed version must read back whole with a valid checksum; every version the child reported
// committed (and did not start deleting) must be there with the checksum it reported.
func TestCrashSafety(t *testing.T) {
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	path := t.TempDir() + "/crash.db"
	rng := rand.New(rand.NewPCG(2026, 12))
	committed := map[int]string{} // version -> sha256 the child reported
	maybeGone := map[int]bool{}
	const kills = 24
	published := 0
	for round := 1; round <= kills; round++ {
		cmd := exec.Command(exe, "-test.run=^$")
		cmd.Env = append(os.Environ(), crashWriterEnv+"="+path, crashWriterEnv+"_SEED="+strconv.Itoa(round))
		stdout, err := cmd.StdoutPipe()
		if err != nil {
			t.Fatal(err)
		}
		var stderr strings.Builder
		cmd.Stderr = &stderr
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		lines := make(chan string, 1024)
		go func() {
			sc := bufio.NewScanner(stdout)
			for sc.Scan() {
				lines <- sc.Text()
			}
			close(lines)
		}()
		handle := func(l string) {
			f := strings.Fields(l)
			v := 0
			if len(f) >= 2 {
				v, _ = strconv.Atoi(f[1])
			}
			switch f[0] {
			case "published":
				committed[v] = f[2]
				published++
			case "deleting":
				maybeGone[v] = true
			case "deleted":
				delete(committed, v)
				delete(maybeGone, v)
			}
		}
		// Odd rounds kill soon after the child has opened the store, even rounds once it has
		// committed its first version and is well into its loop.
		wantLine := "ready"
		if round%2 == 0 {
			wantLine = "published"
		}
		timeout := time.After(30 * time.Second)
	wait:
		for {
			select {
			case l, ok := <-lines:
				if !ok {
					cmd.Wait()
					t.Fatalf("round %d: child ended early: %s", round, stderr.String())
				}
				if l != "ready" {
					handle(l)
				}
				if strings.HasPrefix(l, wantLine) {
					break wait
				}
			case <-timeout:
				cmd.Process.Kill()
				cmd.Wait()
				t.Fatalf("round %d: child did not get going in time: %s", round, stderr.String())
			}
		}
		time.Sleep(time.Duration(rng.IntN(40_000)) * time.Microsecond)
		if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
			t.Fatal(err)
		}
		for l := range lines {
			handle(l)
		}
		err = cmd.Wait()
		if ws, ok := cmd.ProcessState.Sys().(syscall.WaitStatus); !ok || !ws.Signaled() || ws.Signal() != syscall.SIGKILL {
			t.Fatalf("round %d: child ended otherwise than by SIGKILL: %v %s", round, err, stderr.String())
		}
		checkAfterCrash(t, round, path, committed, maybeGone)
	}
	if published < kills/2 { // every even round waits for a committed version
		t.Errorf("the children committed only %d versions over %d kills", published, kills)
	}
	t.Logf("%d kills, %d versions published, %d left", kills, published, len(committed))
}

func checkAfterCrash(t *testing.T, round int, path string, committed map[int]string, maybeGone map[int]bool) {
	t.Helper()
	checkBoltFile(t, path)
	s, err := Open(path, Options{CacheBytes: -1})
	if err != nil {
		t.Fatalf("round %d: store does not open after the kill: %v", round, err)
	}
	defer s.Close()
	if _, err := s.Verify(); err != nil {
		t.Fatalf("round %d: %v", round, err)
	}
	mi, err := s.Describe("crash")
	if err != nil {
		if len(committed) == 0 {
			return
		}
		t.Fatalf("round %d: %v", round, err)
	}
	listed := map[int]bool{}
	for _, vi := range mi.Versions {
		listed[vi.Version] = true
		// Verify has decoded every version in full; Bundle is the ordinary read path.
		_, info, err := s.Bundle(vi.Ref().String())
		if err != nil {
			t.Fatalf("round %d: listed version %s does not read back: %v", round, vi.Ref(), err)
		}
		if want, ok := committed[vi.Version]; ok && info.SHA256 != want {
			t.Fatalf("round %d: %s has checksum %s; the writer committed %s", round, vi.Ref(), info.SHA256, want)
		}
	}
	for v := range committed {
		if !listed[v] && !maybeGone[v] {
			t.Fatalf("round %d: version %d was reported committed but is missing", round, v)
		}
	}
	for v := range maybeGone {
		if !listed[v] {
			delete(committed, v)
		}
		delete(maybeGone, v)
	}
	for a, v := range mi.Aliases {
		if !listed[v] {
			t.Fatalf("round %d: alias %s points at missing version %d", round, a, v)
		}
	}
}

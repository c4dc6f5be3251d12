package api_test

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"runtime"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"

	"strayleaf/api/auth"
	"strayleaf/client"
	"strayleaf/modelstore"
	pb "strayleaf/proto/strayleaf/v1"
)

// buildDaemon builds cmd/strayleafd into dir with the go command that runs the tests.
func buildDaemon(t *testing.T, dir string) string {
	t.Helper()
	bin := filepath.Join(dir, "strayleafd")
	goCmd := filepath.Join(runtime.GOROOT(), "bin", "go")
	if _, err := os.Stat(goCmd); err != nil {
		goCmd = "go"
	}
	args := []string{"build", "-o", bin}
	if raceBuild {
		args = append(args, "-race")
	}
	cmd := exec.Command(goCmd, append(args, "strayleaf/api/cmd/strayleafd")...)
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("building strayleafd: %v\n%s", err, out)
	}
	return bin
}

// daemonProcess is strayleafd running as a child process.
type daemonProcess struct {
	cmd        *exec.Cmd
	grpc, http string
	log        *syncBuffer
	exited     chan struct{} // closed when the process has ended; then exitErr is set
	exitErr    error
}

var servingLine = regexp.MustCompile(`msg="strayleafd serving".* grpc=(\S+) .*http=(\S+)`)

func startProcess(t *testing.T, bin string, args ...string) *daemonProcess {
	t.Helper()
	p := &daemonProcess{cmd: exec.Command(bin, args...), log: &syncBuffer{}, exited: make(chan struct{})}
	stderr, err := p.cmd.StderrPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := p.cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		select {
		case <-p.exited:
		default:
			p.cmd.Process.Kill()
			<-p.exited
			t.Logf("strayleafd log:\n%s", p.log)
		}
	})
	serving := make(chan []string, 1)
	go func() {
		sc := bufio.NewScanner(stderr)
		for sc.Scan() {
			line := sc.Text()
			fmt.Fprintln(p.log, line)
			if m := servingLine.FindStringSubmatch(line); m != nil {
				serving <- m[1:]
			}
		}
		io.Copy(io.Discard, stderr)
		p.exitErr = p.cmd.Wait()
		close(p.exited)
	}()
	select {
	case m := <-serving:
		p.grpc, p.http = m[0], m[1]
	case <-p.exited:
		t.Fatalf("strayleafd exited at start: %v\n%s", p.exitErr, p.log)
	case <-time.After(30 * time.Second):
		t.Fatalf("strayleafd did not start:\n%s", p.log)
	}
	return p
}

// The real binary: SIGHUP rereads the tokens; SIGTERM in the middle of a load of unary calls,
// REST calls, publishes and a long stream loses no accepted request: each call either succeeds
// or is refused as unavailable, the stream in flight is answered to its end, every publish
// answered OK is in the store afterwards and no other, and the daemon exits 0.
func TestDaemonBinarySIGHUPAndSIGTERM(t *testing.T) {
	dir := t.TempDir()
	t0 := time.Now()
	bin := buildDaemon(t, dir)
	t.Logf("built strayleafd in %v", time.Since(t0).Round(time.Millisecond))
	tk := writeTokens(t, dir)
	db := filepath.Join(dir, "models.db")
	p := startProcess(t, bin, "--store", db, "--tokens", tk.file, "--demo", "--grpc-addr", "127.0.0.1:0", "--http-addr", "127.0.0.1:0")
	ctx := context.Background()

	// SIGHUP: a token added to the file works once the daemon rereads it.
	fresh, _ := auth.NewToken()
	line, _ := auth.Line("late-shift", auth.RolePlace, fresh)
	fc, err := client.Dial(p.grpc, client.WithToken(fresh))
	if err != nil {
		t.Fatal(err)
	}
	defer fc.Close()
	if _, err := fc.ListModels(ctx); client.Code(err) != codes.Unauthenticated {
		t.Fatalf("token not yet in the file: %v", err)
	}
	f, _ := os.OpenFile(tk.file, os.O_APPEND|os.O_WRONLY, 0)
	fmt.Fprintln(f, line)
	f.Close()
	p.cmd.Process.Signal(syscall.SIGHUP)
	for deadline := time.Now().Add(10 * time.Second); ; time.Sleep(10 * time.Millisecond) {
		if _, err = fc.ListModels(ctx); err == nil {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("token still refused after SIGHUP: %v\n%s", err, p.log)
		}
	}

	frags := demoFragments(t)
	admin, err := client.Dial(p.grpc, client.WithToken(tk.admin))
	if err != nil {
		t.Fatal(err)
	}
	defer admin.Close()
	bundle, _, err := admin.ExportModel(ctx, "demo")
	if err != nil {
		t.Fatal(err)
	}

	type outcome struct {
		via string
		ok  int
		end error // the call that ended the worker
	}
	var (
		mu        sync.Mutex
		outcomes  []outcome
		published []int
		wg        sync.WaitGroup
		termSent  atomic.Bool
		answered  atomic.Int64 // unary and REST calls answered OK
		streamed  atomic.Int64 // stream answers received
	)
	record := func(o outcome) { mu.Lock(); outcomes = append(outcomes, o); mu.Unlock() }
	giveUp := time.Now().Add(20 * time.Second)
	// Unary placers, each on its own connection.
	for g := range 4 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			c, err := client.Dial(p.grpc, client.WithToken(tk.place))
			if err != nil {
				record(outcome{via: "grpc", end: err})
				return
			}
			defer c.Close()
			o := outcome{via: "grpc place"}
			for i := g; time.Now().Before(giveUp); i++ {
				w := frags[i%len(frags)]
				pl, err := c.Place(ctx, "demo", w.Siglum, w.Readings)
				if err != nil {
					o.end = err
					break
				}
				if pl.Model != "demo@1" || pl.BestGroup == "" {
					o.end = fmt.Errorf("odd answer %+v", pl)
					break
				}
				o.ok++
				answered.Add(1)
			}
			record(o)
		}()
	}
	// Publishers: each version answered OK must be in the store afterwards.
	wg.Add(1)
	go func() {
		defer wg.Done()
		c, err := client.Dial(p.grpc, client.WithToken(tk.publish))
		if err != nil {
			record(outcome{via: "grpc publish", end: err})
			return
		}
		defer c.Close()
		o := outcome{via: "grpc publish"}
		for time.Now().Before(giveUp) {
			r, err := c.PublishModel(ctx, "demo", bundle, "during shutdown", "")
			if err != nil {
				o.end = err
				break
			}
			mu.Lock()
			published = append(published, r.Version)
			mu.Unlock()
			o.ok++
			time.Sleep(5 * time.Millisecond)
		}
		record(o)
	}()
	// REST placers.
	for range 2 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			o := outcome{via: "rest place"}
			for i := 0; time.Now().Before(giveUp); i++ {
				status, err := restPlace(p.http, tk.place, frags[i%len(frags)])
				if err != nil {
					o.end = err
					break
				}
				if status != 200 {
					o.end = fmt.Errorf("REST status %d", status)
					break
				}
				o.ok++
				answered.Add(1)
			}
			record(o)
		}()
	}
	// A long stream, started before SIGTERM and still sending after it.
	const streamN = 1000
	streamDone := make(chan error, 1)
	go func() {
		sctx := metadata.AppendToOutgoingContext(ctx, "authorization", "Bearer "+tk.place)
		c, err := client.Dial(p.grpc)
		if err != nil {
			streamDone <- err
			return
		}
		defer c.Close()
		stream, err := pb.NewPlacementServiceClient(c.Conn()).PlaceStream(sctx)
		if err != nil {
			streamDone <- err
			return
		}
		go func() {
			for i := range streamN {
				w := frags[i%len(frags)]
				req := &pb.PlaceStreamRequest{Model: "demo", Witness: w.Siglum}
				for _, r := range w.Readings {
					req.Readings = append(req.Readings, &pb.WitnessReading{Unit: r.Unit, Reading: r.Reading})
				}
				if stream.Send(req) != nil {
					return
				}
				if i%4 == 0 {
					time.Sleep(time.Millisecond)
				}
			}
			stream.CloseSend()
		}()
		for i := range streamN {
			resp, err := stream.Recv()
			if err != nil {
				streamDone <- fmt.Errorf("stream answer %d of %d: %w", i, streamN, err)
				return
			}
			if resp.GetPlacement().GetModel() != "demo@1" || int(resp.GetIndex()) != i {
				streamDone <- fmt.Errorf("stream answer %d: %v", i, resp)
				return
			}
			streamed.Add(1)
		}
		_, err = stream.Recv()
		if err != io.EOF {
			streamDone <- fmt.Errorf("after the last stream answer: %v", err)
			return
		}
		if !termSent.Load() {
			streamDone <- errors.New("the stream ended before SIGTERM was sent; make it longer")
			return
		}
		streamDone <- nil
	}()

	// SIGTERM once the load is well under way, with the stream still far from its end.
	for answered.Load() < 20 || streamed.Load() < 100 {
		if time.Now().After(giveUp) {
			t.Fatalf("the load never got going: %d calls, %d stream answers\n%s", answered.Load(), streamed.Load(), p.log)
		}
		time.Sleep(time.Millisecond)
	}
	termSent.Store(true)
	t.Logf("SIGTERM after %v", time.Since(t0).Round(time.Millisecond))
	if err := p.cmd.Process.Signal(syscall.SIGTERM); err != nil {
		t.Fatal(err)
	}
	select {
	case <-p.exited:
	case <-time.After(30 * time.Second):
		t.Fatalf("strayleafd still running 30s after SIGTERM\n%s", p.log)
	}
	if p.exitErr != nil {
		t.Fatalf("strayleafd exit: %v\n%s", p.exitErr, p.log)
	}
	t.Logf("exited after %v", time.Since(t0).Round(time.Millisecond))
	wg.Wait()
	if err := <-streamDone; err != nil {
		t.Errorf("the stream in flight at SIGTERM: %v", err)
	}
	total := 0
	for _, o := range outcomes {
		total += o.ok
		refused := false
		switch {
		case strings.HasPrefix(o.via, "grpc"):
			refused = client.Code(o.end) == codes.Unavailable
		case o.via == "rest place":
			// A refused HTTP call fails to connect or finds its idle connection closed; an
			// accepted one would have had a status.
			refused = o.end != nil && !strings.Contains(o.end.Error(), "REST status")
		}
		if !refused {
			t.Errorf("%s worker ended with %v after %d answers; want a refusal", o.via, o.end, o.ok)
		}
	}
	if !strings.Contains(p.log.String(), `msg=stopped`) || !strings.Contains(p.log.String(), "tokens reloaded") {
		t.Errorf("log lacks the reload or the stop:\n%s", p.log)
	}

	// The store closed cleanly and holds the demo plus exactly the publishes answered OK.
	st, err := modelstore.Open(db, modelstore.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	vs, err := st.Versions("demo")
	if err != nil {
		t.Fatal(err)
	}
	if len(vs) != 1+len(published) {
		t.Errorf("store has %d versions; want the demo and the %d publishes answered OK", len(vs), len(published))
	}
	have := map[int]bool{}
	for _, v := range vs {
		have[v.Version] = true
	}
	for _, v := range published {
		if !have[v] {
			t.Errorf("publish answered demo@%d is not in the store", v)
		}
	}
	t.Logf("%d calls answered, %d versions published, before and during shutdown", total, len(published))
}

// restPlace places w over REST at addr and returns the HTTP status.
func restPlace(addr, token string, w client.Witness) (int, error) {
	body, err := json.Marshal(placeBody(w))
	if err != nil {
		return 0, err
	}
	req, err := http.NewRequest("POST", "http://"+addr+"/v1/models/demo/placements", bytes.NewReader(body))
	if err != nil {
		return 0, err
	}
	req.Header.Set("Authorization", "Bearer "+token)
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		return 0, err
	}
	defer resp.Body.Close()
	if _, err := io.Copy(io.Discard, resp.Body); err != nil {
		return 0, err
	}
	return resp.StatusCode, nil
}

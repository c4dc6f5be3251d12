package api_test

import (
	"bytes"
	"context"
	"fmt"
	"reflect"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"google.golang.org/grpc/codes"

	"strayleaf"
	"strayleaf/client"
	"strayleaf/placement/collation"
	"strayleaf/placement/model"
)

// trainDemoSeed trains the demo collation with another seed, for a second, different version.
func trainDemoSeed(t testing.TB, seed uint64) []byte {
	c, err := collation.ReadCSV(bytes.NewReader(strayleaf.DemoCollation), "demo")
	if err != nil {
		t.Fatal(err)
	}
	m, _, err := model.Train(c, model.TrainOptions{Groups: 4, Seed: seed, Restarts: 1})
	if err != nil {
		t.Fatal(err)
	}
	b, err := model.EncodeBundle(m)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// While "current" moves back and forth between two versions, every answer names the version
// it was computed with, and is exactly that version's placement, over gRPC and REST.
func TestAliasMovedWhilePlacing(t *testing.T) {
	td := startDaemon(t, nil)
	ctx := context.Background()
	pub := td.client(t, td.tokens.publish)
	b1, b2 := demoModelBundle(t), trainDemoSeed(t, 7)
	for i, b := range [][]byte{b1, b2} {
		if r, err := pub.PublishModel(ctx, "demo", b, "", ""); err != nil || r.Version != i+1 {
			t.Fatalf("publish %d: %v %v", i+1, r, err)
		}
	}
	models := map[string]*model.Model{"demo@1": decodeBundle(t, b1), "demo@2": decodeBundle(t, b2)}
	frags := demoFragments(t)
	want := map[string][]*client.Placement{}
	for ref, m := range models {
		for _, w := range frags {
			want[ref] = append(want[ref], localPlacement(t, m, ref, w))
		}
	}
	if reflect.DeepEqual(want["demo@1"][0].Groups, want["demo@2"][0].Groups) {
		t.Fatal("the two versions place alike; the test could not tell them apart")
	}

	var (
		stop    atomic.Bool
		seen    sync.Map // ref -> *atomic.Int64
		answers atomic.Int64
		wg      sync.WaitGroup
	)
	for _, ref := range []string{"demo@1", "demo@2"} {
		seen.Store(ref, new(atomic.Int64))
	}
	check := func(via string, i int, p *client.Placement) {
		answers.Add(1)
		exp, ok := want[p.Model]
		if !ok {
			t.Errorf("%s: answer names %q", via, p.Model)
			stop.Store(true)
			return
		}
		n, _ := seen.Load(p.Model)
		n.(*atomic.Int64).Add(1)
		if !sameAnswer(t, p, exp[i]) {
			t.Errorf("%s: answer naming %s is not that version's placement:\n got %+v\nwant %+v", via, p.Model, p, exp[i])
			stop.Store(true)
		}
	}
	c := td.client(t, td.tokens.place)
	for g := range 3 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := g; !stop.Load(); i++ {
				w := frags[i%len(frags)]
				p, err := c.Place(ctx, "demo", w.Siglum, w.Readings)
				if err != nil {
					t.Errorf("gRPC: %v", err)
					return
				}
				check("gRPC", i%len(frags), p)
			}
		}()
	}
	wg.Add(1)
	go func() {
		defer wg.Done()
		for i := 0; !stop.Load(); i++ {
			w := frags[i%len(frags)]
			resp := td.rest(t, "POST", "/v1/models/demo@current/placements", td.tokens.place, placeBody(w))
			if resp.status != 200 {
				t.Errorf("REST: %d %s", resp.status, resp.body)
				return
			}
			var p client.Placement
			resp.decode(t, &p)
			check("REST", i%len(frags), &p)
		}
	}()
	// Move "current" ten times, each time waiting until answers name the new version.
	for move := range 10 {
		v := 2 - move%2
		ref := fmt.Sprintf("demo@%d", v)
		if _, err := pub.SetAlias(ctx, "demo", "current", v); err != nil {
			t.Fatal(err)
		}
		n, _ := seen.Load(ref)
		before := n.(*atomic.Int64).Load()
		deadline := time.Now().Add(5 * time.Second)
		for n.(*atomic.Int64).Load() < before+5 && time.Now().Before(deadline) && !stop.Load() {
			time.Sleep(time.Millisecond)
		}
		if n.(*atomic.Int64).Load() < before+5 {
			t.Errorf("move %d: no answers from %s after the alias moved to it", move, ref)
			break
		}
	}
	stop.Store(true)
	wg.Wait()
	t.Logf("%d answers while the alias moved 10 times", answers.Load())
}

// A bad model name or a bad alias is refused with InvalidArgument and a field violation on the
// field at fault.
func TestBadNameOrAliasNamesItsField(t *testing.T) {
	td := startDaemon(t, nil)
	ctx := context.Background()
	c := td.client(t, td.tokens.publish)
	bundle := demoModelBundle(t)
	if _, err := c.PublishModel(ctx, "demo", bundle, "", ""); err != nil {
		t.Fatal(err)
	}
	field := func(err error) string {
		e, ok := err.(*client.Error)
		if !ok || e.Code != codes.InvalidArgument || len(e.Violations) != 1 {
			return fmt.Sprintf("not one InvalidArgument violation: %v", err)
		}
		return e.Violations[0].Field
	}
	_, errName := c.SetAlias(ctx, "bad name", "stable", 1)
	_, errAlias := c.SetAlias(ctx, "demo", "bad alias", 1)
	errRemove := c.RemoveAlias(ctx, "demo", "9lives")
	_, errPubName := c.PublishModel(ctx, "-demo", bundle, "", "")
	_, errPubAlias := c.PublishModel(ctx, "demo", bundle, "", "bad alias")
	for _, tc := range []struct {
		what string
		err  error
		want string
	}{
		{"SetAlias with a bad model name", errName, "name"},
		{"SetAlias with a bad alias", errAlias, "alias"},
		{"RemoveAlias with a bad alias", errRemove, "alias"},
		{"PublishModel with a bad model name", errPubName, "name"},
		{"PublishModel with a bad alias", errPubAlias, "alias"},
	} {
		if got := field(tc.err); got != tc.want {
			t.Errorf("%s: field %q; want %q", tc.what, got, tc.want)
		}
	}
}

package api_test

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"reflect"
	"strings"
	"testing"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/metadata"
	"google.golang.org/protobuf/encoding/protojson"

	"strayleaf/api"
	"strayleaf/api/server"
	"strayleaf/client"
	"strayleaf/placement/simulate"
	pb "strayleaf/proto/strayleaf/v1"
)

// streamCase is one witness of the mixed stream and what its answer must be.
type streamCase struct {
	req       *pb.PlaceStreamRequest
	w         client.Witness
	code      codes.Code // OK: placed
	field     string     // the field violation expected, if any
	unknownAt string     // a unit that must be listed in unknown_readings
}

// mixedStream builds n witnesses cut from the demo copies and fragments, every 7th of them bad
// in one of the ways a pipeline gets wrong, plus some with a reading the model does not know.
func mixedStream(t testing.TB, n int) []streamCase {
	src := append(demoCopies(t), demoFragments(t)...)
	rng := simulate.NewRand(20261202)
	var out []streamCase
	for i := range n {
		base := src[i%len(src)]
		// A contiguous window of the witness's readings, 20 to all of them.
		k := 20 + simulate.IntN(rng, len(base.Readings)-19)
		start := simulate.IntN(rng, len(base.Readings)-k+1)
		w := client.Witness{Siglum: fmt.Sprintf("%s/%d", base.Siglum, i), Readings: append([]client.Reading(nil), base.Readings[start:start+k]...)}
		c := streamCase{w: w, code: codes.OK}
		model := "demo"
		if i%5 == 1 {
			model = "" // the same reference as the message before
		}
		if i%7 == 3 {
			switch (i / 7) % 6 {
			case 0:
				c.w.Readings = append(c.w.Readings, client.Reading{Unit: "lamp.99", Reading: "x"})
				c.code, c.field = codes.InvalidArgument, fmt.Sprintf("readings[%d].unit", len(c.w.Readings)-1)
			case 1:
				c.w.Readings = append(c.w.Readings, c.w.Readings[0])
				c.code, c.field = codes.InvalidArgument, fmt.Sprintf("readings[%d].unit", len(c.w.Readings)-1)
			case 2:
				c.w.Readings = nil
				c.code, c.field = codes.InvalidArgument, "readings"
			case 3:
				c.w.Siglum = ""
				c.code, c.field = codes.InvalidArgument, "witness"
			case 4:
				model = "nosuch"
				c.code = codes.NotFound
			case 5:
				c.w.Readings[0].Reading = "zzunheard"
				c.unknownAt = c.w.Readings[0].Unit
			}
		}
		c.req = &pb.PlaceStreamRequest{Model: model, Witness: c.w.Siglum}
		for _, r := range c.w.Readings {
			c.req.Readings = append(c.req.Readings, &pb.WitnessReading{Unit: r.Unit, Reading: r.Reading})
		}
		out = append(out, c)
	}
	// A message with an empty reference after "nosuch" would inherit it; keep the plan simple:
	// every message after a "nosuch" names its model.
	for i := 1; i < len(out); i++ {
		if out[i].req.Model == "" && out[i-1].req.Model == "nosuch" {
			out[i].req.Model = "demo"
		}
	}
	return out
}

func grpcConn(t testing.TB, addr string) *grpc.ClientConn {
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close() })
	return conn
}

func checkStreamAnswer(t *testing.T, i int, c streamCase, resp *pb.PlaceStreamResponse, want *client.Placement) {
	t.Helper()
	if int(resp.GetIndex()) != i || resp.GetWitness() != c.w.Siglum {
		t.Fatalf("answer %d is for index %d, witness %q; want %q", i, resp.GetIndex(), resp.GetWitness(), c.w.Siglum)
	}
	if c.code != codes.OK {
		e := resp.GetError()
		if e == nil || codes.Code(e.GetCode()) != c.code {
			t.Errorf("witness %d (%q): %v; want error %v", i, c.w.Siglum, resp, c.code)
			return
		}
		if c.field != "" && (len(e.GetFieldViolations()) != 1 || e.GetFieldViolations()[0].GetField() != c.field) {
			t.Errorf("witness %d: violations %v; want one on %s", i, e.GetFieldViolations(), c.field)
		}
		return
	}
	p := resp.GetPlacement()
	if p == nil {
		t.Errorf("witness %d (%q): %v; want a placement", i, c.w.Siglum, resp.GetError())
		return
	}
	got := placementFromProto(p)
	if !reflect.DeepEqual(got, want) {
		t.Errorf("witness %d:\n got %+v\nwant %+v", i, got, want)
	}
	// A reading the model does not know is accepted and reported, unless the model set the
	// whole unit aside (then the unit is listed as uninformative).
	if c.unknownAt != "" && !contains(p.GetUnknownReadings(), c.unknownAt) && !contains(p.GetUninformativeUnits(), c.unknownAt) {
		t.Errorf("witness %d: unknown readings %v; want %s among them", i, p.GetUnknownReadings(), c.unknownAt)
	}
}

func contains(s []string, x string) bool {
	for _, v := range s {
		if v == x {
			return true
		}
	}
	return false
}

func placementFromProto(p *pb.Placement) *client.Placement {
	out := &client.Placement{Witness: p.GetWitness(), Model: p.GetModel(), BestGroup: p.GetBestGroup(), Confidence: p.GetConfidence(),
		CoveredUnits: int(p.GetCoveredUnits()), UsedUnits: int(p.GetUsedUnits()), UnknownReadings: nonNil(p.GetUnknownReadings()),
		UninformativeUnits: nonNil(p.GetUninformativeUnits()), RelativeResidual: p.GetRelativeResidual(),
		InformativeCoverage: p.GetInformativeCoverage(), Calibrated: p.GetCalibrated(), Mixed: p.GetMixed()}
	for _, g := range p.GetGroups() {
		out.Groups = append(out.Groups, client.GroupShare{Group: g.GetGroup(), Share: g.GetShare()})
	}
	if mx := p.GetMixture(); mx != nil {
		out.Mixture = &client.Mixture{Primary: mx.GetPrimary(), Secondary: mx.GetSecondary(), SecondaryShare: mx.GetSecondaryShare(),
			LikelihoodShare: mx.GetLikelihoodShare(), LikelihoodRatio: mx.GetLikelihoodRatio()}
	}
	return out
}

// A stream of 1,000 witnesses, bad ones among them: one answer per witness, in order, each bad
// witness with its own error entry, the stream going on, every placement what the model computes.
func TestPlaceStreamThousandWitnessesWithBadOnes(t *testing.T) {
	td := startDaemon(t, nil)
	td.publishDemo(t, "demo")
	m := decodeBundle(t, demoModelBundle(t))
	cases := mixedStream(t, 1000)
	want := make([]*client.Placement, len(cases))
	bad := 0
	for i, c := range cases {
		if c.code == codes.OK {
			want[i] = localPlacement(t, m, "demo@1", c.w)
		} else {
			bad++
		}
	}
	if bad < 100 {
		t.Fatalf("only %d bad witnesses in the plan", bad)
	}

	ctx := metadata.AppendToOutgoingContext(context.Background(), "authorization", "Bearer "+td.tokens.place)
	stream, err := pb.NewPlacementServiceClient(grpcConn(t, td.GRPCAddr())).PlaceStream(ctx)
	if err != nil {
		t.Fatal(err)
	}
	go func() {
		for _, c := range cases {
			if err := stream.Send(c.req); err != nil {
				return
			}
		}
		stream.CloseSend()
	}()
	for i, c := range cases {
		resp, err := stream.Recv()
		if err != nil {
			t.Fatalf("answer %d: %v", i, err)
		}
		checkStreamAnswer(t, i, c, resp, want[i])
	}
	if _, err := stream.Recv(); err != io.EOF {
		t.Fatalf("after the last answer: %v; want EOF", err)
	}

	// The client's PlaceAll gives the same answers for the good witnesses (of the first 300).
	var good []client.Witness
	var goodWant []*client.Placement
	for i, c := range cases[:300] {
		if c.code == codes.OK {
			good = append(good, c.w)
			goodWant = append(goodWant, want[i])
		}
	}
	n := 0
	err = td.client(t, td.tokens.place).PlaceAll(context.Background(), "demo", good, func(r client.StreamResult) error {
		if r.Index != n || r.Err != nil || !reflect.DeepEqual(r.Placement, goodWant[n]) {
			return fmt.Errorf("PlaceAll answer %d: %+v", n, r)
		}
		n++
		return nil
	})
	if err != nil || n != len(good) {
		t.Fatalf("PlaceAll: %v after %d of %d", err, n, len(good))
	}

	// REST: newline-delimited JSON in, newline-delimited {"result": ...} out, same answers.
	var body bytes.Buffer
	enc := json.NewEncoder(&body)
	const restN = 200
	for _, c := range cases[:restN] {
		readings := make([]map[string]string, len(c.req.Readings))
		for j, r := range c.req.Readings {
			readings[j] = map[string]string{"unit": r.Unit, "reading": r.Reading}
		}
		enc.Encode(map[string]any{"model": c.req.Model, "witness": c.req.Witness, "readings": readings})
	}
	req, _ := http.NewRequest("POST", "http://"+td.HTTPAddr()+"/v1/placements:stream", &body)
	req.Header.Set("Authorization", "Bearer "+td.tokens.place)
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	if resp.StatusCode != 200 {
		b, _ := io.ReadAll(resp.Body)
		t.Fatalf("REST stream: %d %s", resp.StatusCode, b)
	}
	sc := bufio.NewScanner(resp.Body)
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	i := 0
	for ; sc.Scan(); i++ {
		var line struct {
			Result json.RawMessage `json:"result"`
			Error  json.RawMessage `json:"error"`
		}
		if err := json.Unmarshal(sc.Bytes(), &line); err != nil || line.Result == nil {
			t.Fatalf("REST stream line %d: %s (%v)", i, sc.Bytes(), err)
		}
		var r pb.PlaceStreamResponse
		if err := protojson.Unmarshal(line.Result, &r); err != nil {
			t.Fatalf("REST stream line %d: %v", i, err)
		}
		checkStreamAnswer(t, i, cases[i], &r, want[i])
	}
	if i != restN {
		t.Fatalf("REST stream: %d answers for %d witnesses", i, restN)
	}
}

// A stream longer than the limit is answered up to the limit and then ended with
// ResourceExhausted.
func TestPlaceStreamLimit(t *testing.T) {
	td := startDaemon(t, func(c *api.Config) {
		c.Limits = server.DefaultLimits()
		c.Limits.MaxWitnessesPerStream = 50
	})
	td.publishDemo(t, "demo")
	cases := mixedStream(t, 60)
	ctx := metadata.AppendToOutgoingContext(context.Background(), "authorization", "Bearer "+td.tokens.place)
	stream, err := pb.NewPlacementServiceClient(grpcConn(t, td.GRPCAddr())).PlaceStream(ctx)
	if err != nil {
		t.Fatal(err)
	}
	go func() {
		for _, c := range cases {
			if stream.Send(c.req) != nil {
				return
			}
		}
		stream.CloseSend()
	}()
	n := 0
	for {
		_, err := stream.Recv()
		if err != nil {
			if client.Code(err) != codes.ResourceExhausted || !strings.Contains(err.Error(), "more than 50 witnesses") {
				t.Fatalf("stream ended with %v; want ResourceExhausted", err)
			}
			break
		}
		n++
	}
	if n != 50 {
		t.Fatalf("%d answers before the limit; want 50", n)
	}
}

package api_test

import (
	"context"
	"encoding/json"
	"math"
	"reflect"
	"slices"
	"testing"

	"google.golang.org/grpc/codes"

	"strayleaf/client"
	"strayleaf/placement/model"
)

// localPlacementWith is what the API must answer for w against m when asked for opt: the model's
// own placement (model.Model.PlaceWith) and, with opt.BySection, model.Model.PlaceBySection, in
// the client's shape.
func localPlacementWith(t testing.TB, m *model.Model, ref string, w client.Witness, opt client.PlaceOptions) *client.Placement {
	t.Helper()
	rs := modelReadings(w.Readings)
	p, err := m.PlaceWith(w.Siglum, rs, nil, model.PlaceOptions{Nearest: opt.Nearest})
	if err != nil {
		t.Fatalf("local placement of %s: %v", w.Siglum, err)
	}
	out := &client.Placement{Witness: p.Witness, Model: ref, BestGroup: p.BestGroup, Confidence: p.Confidence,
		CoveredUnits: p.CoveredUnits, UsedUnits: p.UsedUnits, UnknownReadings: nonNil(p.UnknownReadings),
		UninformativeUnits: nonNil(p.UninformativeUnits), RelativeResidual: p.RelativeResidual,
		InformativeCoverage: p.InformativeCoverage, Calibrated: p.Calibrated, Mixed: p.Mixed}
	for _, g := range p.Groups {
		out.Groups = append(out.Groups, client.GroupShare{Group: g.Group, Share: g.Share})
	}
	if mx := p.Mixture; mx != nil {
		out.Mixture = &client.Mixture{Primary: mx.Primary, Secondary: mx.Secondary, SecondaryShare: mx.Share,
			LikelihoodShare: mx.LikelihoodShare, LikelihoodRatio: mx.LikelihoodRatio}
	}
	for _, n := range p.Nearest {
		out.Nearest = append(out.Nearest, client.Neighbour{Witness: n.Witness, BestGroup: n.BestGroup, Agree: n.Agree,
			UnitsCompared: n.Compared, Agreement: n.Agreement})
	}
	if !opt.BySection {
		return out
	}
	sp, err := m.PlaceBySection(w.Siglum, rs, nil)
	if err != nil {
		t.Fatalf("local placement by section of %s: %v", w.Siglum, err)
	}
	block := sp.BlockMixture
	out.BlockMixture = &block
	out.Sections, out.Changes = []client.SectionPlacement{}, []client.BlockChange{}
	for _, s := range sp.Sections {
		out.Sections = append(out.Sections, client.SectionPlacement{Section: s.Section, BestGroup: s.BestGroup, Confidence: s.Confidence, CoveredUnits: s.CoveredUnits})
	}
	for _, c := range sp.Changes {
		out.Changes = append(out.Changes, client.BlockChange{AfterSection: c.After, AtSection: c.At, FromGroup: c.From, ToGroup: c.To})
	}
	return out
}

// sameAnswer compares two placements by their JSON, where an absent list and an empty one are
// the same (protojson writes empty lists, Go leaves them nil).
func sameAnswer(t testing.TB, a, b *client.Placement) bool {
	t.Helper()
	ja, err := json.Marshal(a)
	if err != nil {
		t.Fatal(err)
	}
	jb, err := json.Marshal(b)
	if err != nil {
		t.Fatal(err)
	}
	return string(ja) == string(jb)
}

// placeJSONFields are the field names of a `strayleaf place --json` line (model always set by
// the service); the optional ones are given only when asked for.
var (
	placeJSONFields = []string{"witness", "model", "best_group", "groups", "confidence", "covered_units", "used_units",
		"unknown_readings", "uninformative_units", "relative_residual", "informative_coverage", "calibrated", "mixed", "mixture"}
	placeJSONAsked = []string{"nearest", "sections", "block_mixture", "block_changes"}
)

// With nearest and by_section asked for, gRPC (unary and stream) and REST answer exactly what
// model.PlaceWith and model.PlaceBySection compute; without, the answer carries neither.
func TestPlaceNearestAndBySectionOverGRPCAndREST(t *testing.T) {
	td := startDaemon(t, nil)
	ctx := context.Background()
	bundle := demoModelBundle(t)
	m := decodeBundle(t, bundle)
	if _, err := td.client(t, td.tokens.publish).PublishModel(ctx, "wardens", bundle, "", ""); err != nil {
		t.Fatal(err)
	}
	if len(m.Sections()) < 2 || len(m.Proto().GetTrainingWitnesses()) == 0 {
		t.Fatalf("demo model has %d sections and %d training witnesses", len(m.Sections()), len(m.Proto().GetTrainingWitnesses()))
	}
	c := td.client(t, td.tokens.place)
	witnesses := append(demoFragments(t), demoCopies(t)[:4]...)
	asked := client.PlaceOptions{Nearest: 3, BySection: true}
	blocks := 0
	for _, w := range witnesses {
		want := localPlacementWith(t, m, "wardens@1", w, asked)
		got, err := c.PlaceWith(ctx, "wardens", w.Siglum, w.Readings, asked)
		if err != nil {
			t.Fatalf("gRPC place %s: %v", w.Siglum, err)
		}
		if !reflect.DeepEqual(got, want) {
			t.Errorf("gRPC place %s with nearest and by_section:\n got %+v\nwant %+v", w.Siglum, got, want)
		}
		if len(got.Nearest) == 0 || len(got.Nearest) > 3 || got.BlockMixture == nil || len(got.Sections) == 0 {
			t.Errorf("%s: %d nearest, block mixture %v, %d sections", w.Siglum, len(got.Nearest), got.BlockMixture, len(got.Sections))
		}
		if *got.BlockMixture {
			blocks++
		}
		body := placeBody(w)
		body["nearest"], body["by_section"] = 3, true
		resp := td.rest(t, "POST", "/v1/models/wardens/placements", td.tokens.place, body)
		if resp.status != 200 {
			t.Fatalf("REST place %s: %d %s", w.Siglum, resp.status, resp.body)
		}
		var viaREST client.Placement
		resp.decode(t, &viaREST)
		if !sameAnswer(t, &viaREST, want) {
			t.Errorf("REST place %s with nearest and by_section:\n got %s\nwant %+v", w.Siglum, resp.body, want)
		}
		var fields map[string]json.RawMessage
		resp.decode(t, &fields)
		for _, f := range slices.Concat(placeJSONFields, placeJSONAsked) {
			if _, ok := fields[f]; !ok && (f != "mixture" || want.Mixture != nil) {
				t.Errorf("REST placement of %s lacks %q: %s", w.Siglum, f, resp.body)
			}
		}
		if len(fields) > len(placeJSONFields)+len(placeJSONAsked) {
			t.Errorf("REST placement of %s has fields beyond the CLI's: %s", w.Siglum, resp.body)
		}

		// Not asked: no nearest witnesses, no sections.
		plain, err := c.Place(ctx, "wardens", w.Siglum, w.Readings)
		if err != nil {
			t.Fatal(err)
		}
		if wantPlain := localPlacementWith(t, m, "wardens@1", w, client.PlaceOptions{}); !reflect.DeepEqual(plain, wantPlain) {
			t.Errorf("gRPC place %s:\n got %+v\nwant %+v", w.Siglum, plain, wantPlain)
		}
		if plain.Nearest != nil || plain.Sections != nil || plain.BlockMixture != nil {
			t.Errorf("%s: unasked parts in %+v", w.Siglum, plain)
		}
		resp = td.rest(t, "POST", "/v1/models/wardens/placements", td.tokens.place, placeBody(w))
		fields = nil
		resp.decode(t, &fields)
		if _, ok := fields["block_mixture"]; ok {
			t.Errorf("REST placement of %s not by section has block_mixture: %s", w.Siglum, resp.body)
		}
	}
	t.Logf("%d of %d witnesses read as block-mixed", blocks, len(witnesses))

	// The stream carries the same options per witness.
	n := 0
	err := c.PlaceAllWith(ctx, "wardens", witnesses, asked, func(r client.StreamResult) error {
		n++
		if r.Err != nil {
			t.Errorf("stream %s: %v", r.Witness, r.Err)
			return nil
		}
		if want := localPlacementWith(t, m, "wardens@1", witnesses[r.Index], asked); !reflect.DeepEqual(r.Placement, want) {
			t.Errorf("stream place %s:\n got %+v\nwant %+v", r.Witness, r.Placement, want)
		}
		return nil
	})
	if err != nil || n != len(witnesses) {
		t.Fatalf("stream: %d answers, %v", n, err)
	}

	// A negative count is refused, as is by_section against a model without sections.
	if _, err := c.PlaceWith(ctx, "wardens", witnesses[0].Siglum, witnesses[0].Readings, client.PlaceOptions{Nearest: -1}); client.Code(err) != codes.InvalidArgument ||
		len(err.(*client.Error).Violations) != 1 || err.(*client.Error).Violations[0].Field != "nearest" {
		t.Errorf("nearest -1: %v", err)
	}
	// A count far beyond the training witnesses names at most all of them (it once sized a
	// buffer of that many and ran the daemon out of memory).
	huge, err := c.PlaceWith(ctx, "wardens", witnesses[0].Siglum, witnesses[0].Readings, client.PlaceOptions{Nearest: math.MaxInt32})
	if err != nil {
		t.Fatalf("nearest MaxInt32: %v", err)
	}
	if nt := len(m.Proto().GetTrainingWitnesses()); len(huge.Nearest) == 0 || len(huge.Nearest) > nt {
		t.Errorf("nearest MaxInt32: %d witnesses named; want 1 to %d", len(huge.Nearest), nt)
	}
	flat := synthModel(20, 3, 5)
	for _, u := range flat.Units {
		u.Section = ""
	}
	flatBundle, err := model.EncodeBundle(flat)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := td.client(t, td.tokens.publish).PublishModel(ctx, "flat", flatBundle, "", ""); err != nil {
		t.Fatal(err)
	}
	fw := client.Witness{Siglum: "F1", Readings: []client.Reading{{Unit: "u001", Reading: "r1"}, {Unit: "u002", Reading: "r0"}}}
	if _, err := c.PlaceWith(ctx, "flat", fw.Siglum, fw.Readings, client.PlaceOptions{BySection: true}); client.Code(err) != codes.FailedPrecondition {
		t.Errorf("by_section without sections: %v; want FailedPrecondition", err)
	}
	if _, err := c.PlaceWith(ctx, "flat", fw.Siglum, fw.Readings, client.PlaceOptions{}); err != nil {
		t.Errorf("placing against the model without sections: %v", err)
	}
}

package api_test

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"net/http"
	"reflect"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	"strayleaf/client"
)

// Publish, list, describe and place over gRPC and over REST: both answer exactly what the model
// itself computes, and the same thing.
func TestPublishListPlaceOverGRPCAndREST(t *testing.T) {
	td := startDaemon(t, nil)
	ctx := context.Background()
	pub := td.client(t, td.tokens.publish)
	bundle := demoModelBundle(t)
	m := decodeBundle(t, bundle)

	r, err := pub.PublishModel(ctx, "wardens", bundle, "first cut", "")
	if err != nil {
		t.Fatal(err)
	}
	if r.String() != "wardens@1" {
		t.Fatalf("published %s; want wardens@1", r)
	}

	c := td.client(t, td.tokens.place)
	list, err := c.ListModels(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if len(list) != 1 || list[0].Name != "wardens" || !reflect.DeepEqual(list[0].Versions, []int{1}) || list[0].LatestVersion != 1 ||
		!reflect.DeepEqual(list[0].Aliases, map[string]int{"current": 1}) {
		t.Fatalf("ListModels = %+v", list)
	}
	bsum := sha256.Sum256(bundle)
	if vd := list[0].VersionDetails; len(vd) != 1 || vd[0].Version != 1 || vd[0].PublishedBy != "editor" || vd[0].Note != "first cut" ||
		vd[0].BundleSHA256 != hex.EncodeToString(bsum[:]) || vd[0].BundleBytes != len(bundle) || vd[0].Summary.GroupCount != m.K() ||
		vd[0].Summary.UnitCount != len(m.Proto().GetUnits()) || vd[0].PublishTime.IsZero() {
		t.Errorf("version details %+v", vd)
	}
	if ad := list[0].AliasDetails; len(ad) != 1 || ad[0].Alias != "current" || ad[0].Version != 1 || ad[0].SetBy != "editor" {
		t.Errorf("alias details %+v", ad)
	}
	var restList struct {
		Models []struct {
			Name          string           `json:"name"`
			Versions      []int            `json:"versions"`
			LatestVersion int              `json:"latest_version"`
			Aliases       map[string]int32 `json:"aliases"`
		} `json:"models"`
	}
	resp := td.rest(t, "GET", "/v1/models", td.tokens.place, nil)
	if resp.status != 200 {
		t.Fatalf("GET /v1/models: %d %s", resp.status, resp.body)
	}
	resp.decode(t, &restList)
	if len(restList.Models) != 1 || restList.Models[0].Name != "wardens" || restList.Models[0].LatestVersion != 1 || restList.Models[0].Aliases["current"] != 1 {
		t.Fatalf("REST list: %s", resp.body)
	}

	// GetModel: the groups and units of the model, the same over both doors.
	detail, err := c.GetModel(ctx, "wardens@current")
	if err != nil {
		t.Fatal(err)
	}
	if detail.GetModel() != "wardens@1" || int(detail.GetGroupCount()) != m.K() || len(detail.GetUnits()) != len(m.Proto().GetUnits()) ||
		!reflect.DeepEqual(detail.GetAliases(), []string{"current"}) || detail.GetVersionInfo().GetPublishedBy() != "editor" {
		t.Fatalf("GetModel: model %s, %d groups, %d units, aliases %v, by %q", detail.GetModel(), detail.GetGroupCount(), len(detail.GetUnits()), detail.GetAliases(), detail.GetVersionInfo().GetPublishedBy())
	}
	sum := sha256.Sum256(bundle)
	if detail.GetVersionInfo().GetBundleSha256() != hex.EncodeToString(sum[:]) {
		t.Errorf("bundle sha256 %s; want %x", detail.GetVersionInfo().GetBundleSha256(), sum)
	}
	var restDetail map[string]any
	resp = td.rest(t, "GET", "/v1/models/wardens@1", td.tokens.place, nil)
	resp.decode(t, &restDetail)
	if resp.status != 200 || restDetail["model"] != "wardens@1" || len(restDetail["groups"].([]any)) != m.K() {
		t.Fatalf("REST GetModel: %d %.300s", resp.status, resp.body)
	}
	for _, key := range []string{"version_info", "collation_sha256", "group_count", "units", "training_witness_count", "set_aside"} {
		if _, ok := restDetail[key]; !ok {
			t.Errorf("REST GetModel lacks %q", key)
		}
	}

	frags := demoFragments(t)
	if len(frags) < 5 {
		t.Fatalf("%d demo fragments", len(frags))
	}
	for _, ref := range []string{"wardens", "wardens@1", "wardens@current"} {
		for _, w := range frags {
			want := localPlacement(t, m, "wardens@1", w)
			got, err := c.Place(ctx, ref, w.Siglum, w.Readings)
			if err != nil {
				t.Fatalf("gRPC place %s against %s: %v", w.Siglum, ref, err)
			}
			if !reflect.DeepEqual(got, want) {
				t.Errorf("gRPC place %s against %s:\n got %+v\nwant %+v", w.Siglum, ref, got, want)
			}
			resp := td.rest(t, "POST", "/v1/models/"+ref+"/placements", td.tokens.place, placeBody(w))
			if resp.status != 200 {
				t.Fatalf("REST place %s: %d %s", w.Siglum, resp.status, resp.body)
			}
			var viaREST client.Placement
			resp.decode(t, &viaREST)
			if !sameAnswer(t, &viaREST, got) {
				t.Errorf("REST and gRPC differ for %s:\nREST %+v\ngRPC %+v", w.Siglum, viaREST, got)
			}
			// The REST answer has the fields of `strayleaf place --json` (nearest witnesses and
			// sections only when asked; see TestPlaceNearestAndBySectionOverGRPCAndREST).
			var fields map[string]json.RawMessage
			resp.decode(t, &fields)
			for _, f := range placeJSONFields {
				if _, ok := fields[f]; !ok && (f != "mixture" || want.Mixture != nil) {
					t.Errorf("REST placement lacks %q: %s", f, resp.body)
				}
			}
			if _, ok := fields["block_mixture"]; ok || len(fields) > len(placeJSONFields)+len(placeJSONAsked) {
				t.Errorf("REST placement fields: %s", resp.body)
			}
		}
	}

	// Suggest: the model's own ranking, the same over both doors; with nothing checked, the
	// probe list.
	for _, tc := range []struct {
		w   client.Witness
		opt client.SuggestOptions
	}{
		{frags[0], client.SuggestOptions{Top: 5}},
		{client.Witness{Siglum: "blank"}, client.SuggestOptions{}},
		{frags[1], client.SuggestOptions{Top: 3, Candidates: []string{frags[0].Readings[0].Unit, frags[0].Readings[1].Unit, "toll.40"}}},
	} {
		want := localSuggestions(t, m, "wardens@1", tc.w, tc.opt)
		got, err := c.SuggestUnits(ctx, "wardens", tc.w.Siglum, tc.w.Readings, tc.opt)
		if err != nil {
			t.Fatalf("Suggest %s: %v", tc.w.Siglum, err)
		}
		if !reflect.DeepEqual(got, want) {
			t.Errorf("Suggest %s:\n got %+v\nwant %+v", tc.w.Siglum, got, want)
		}
		if (len(tc.w.Readings) == 0) != got.Probe || len(got.Units) == 0 {
			t.Errorf("Suggest %s: probe %v with %d readings, %d units", tc.w.Siglum, got.Probe, len(tc.w.Readings), len(got.Units))
		}
		body := map[string]any{"witness": tc.w.Siglum, "readings": nonNilReadings(tc.w.Readings), "max_units": tc.opt.Top}
		if tc.opt.Candidates != nil {
			body["candidates"] = tc.opt.Candidates
		}
		resp := td.rest(t, "POST", "/v1/models/wardens/suggestions", td.tokens.place, body)
		if resp.status != 200 {
			t.Fatalf("REST suggest: %d %s", resp.status, resp.body)
		}
		var viaREST client.Suggestions
		resp.decode(t, &viaREST)
		if !reflect.DeepEqual(&viaREST, got) {
			t.Errorf("REST and gRPC suggestions differ for %s:\nREST %+v\ngRPC %+v", tc.w.Siglum, viaREST, got)
		}
	}
	if _, err := c.SuggestUnits(ctx, "wardens", "F", nil, client.SuggestOptions{Candidates: []string{"lamp.01"}}); client.Code(err) != codes.InvalidArgument ||
		len(err.(*client.Error).Violations) != 1 || err.(*client.Error).Violations[0].Field != "candidates[0]" {
		t.Errorf("Suggest with an unknown candidate: %v", err)
	}

	// A second version, an alias moved over REST, an export, and a delete refused while aliased.
	if r2, err := pub.PublishModel(ctx, "wardens", bundle, "again", "candidate"); err != nil || r2.String() != "wardens@2" {
		t.Fatalf("second publish: %v %v", r2, err)
	}
	resp = td.rest(t, "PUT", "/v1/models/wardens/aliases/current", td.tokens.publish, map[string]any{"version": 2})
	if resp.status != 200 || !strings.Contains(string(resp.body), `"model":"wardens@2"`) {
		t.Fatalf("REST set alias: %d %s", resp.status, resp.body)
	}
	if p, err := c.Place(ctx, "wardens", frags[0].Siglum, frags[0].Readings); err != nil || p.Model != "wardens@2" {
		t.Fatalf("after moving current: %v %v", p, err)
	}
	// Remove an alias over gRPC and REST; the history records every change with its author.
	if err := pub.RemoveAlias(ctx, "wardens", "candidate"); err != nil {
		t.Fatal(err)
	}
	if err := pub.RemoveAlias(ctx, "wardens", "candidate"); client.Code(err) != codes.NotFound {
		t.Errorf("removing a removed alias: %v", err)
	}
	if _, err := pub.SetAlias(ctx, "wardens", "stable", 1); err != nil {
		t.Fatal(err)
	}
	if resp := td.rest(t, "DELETE", "/v1/models/wardens/aliases/stable", td.tokens.publish, nil); resp.status != 200 {
		t.Fatalf("REST remove alias: %d %s", resp.status, resp.body)
	}
	hist, err := c.History(ctx, "wardens")
	if err != nil {
		t.Fatal(err)
	}
	var kinds []string
	for _, e := range hist {
		kinds = append(kinds, e.Kind)
		if e.By != "editor" {
			t.Errorf("event %+v not recorded as by editor", e)
		}
	}
	if want := []string{"publish", "alias", "publish", "alias", "alias", "unalias", "alias", "unalias"}; !reflect.DeepEqual(kinds, want) {
		t.Errorf("history kinds %v; want %v", kinds, want)
	}
	resp = td.rest(t, "GET", "/v1/history?name=wardens", td.tokens.place, nil)
	var restHist struct {
		Events []struct {
			Kind string `json:"kind"`
			By   string `json:"by"`
		} `json:"events"`
	}
	resp.decode(t, &restHist)
	if resp.status != 200 || len(restHist.Events) != len(hist) {
		t.Errorf("REST history: %d %s", resp.status, resp.body)
	}

	admin := td.client(t, td.tokens.admin)
	b, ref, err := admin.ExportModel(ctx, "wardens@1")
	if err != nil || ref.String() != "wardens@1" || string(b) != string(bundle) {
		t.Fatalf("export: %v %v (%d bytes; want the %d published)", ref, err, len(b), len(bundle))
	}
	resp = td.rest(t, "GET", "/v1/models/wardens@1/bundle", td.tokens.admin, nil)
	var exp struct {
		Model  string `json:"model"`
		Bundle []byte `json:"bundle"`
	}
	resp.decode(t, &exp)
	if resp.status != 200 || exp.Model != "wardens@1" || string(exp.Bundle) != string(bundle) {
		t.Fatalf("REST export: %d, %s, %d bytes", resp.status, exp.Model, len(exp.Bundle))
	}
	err = admin.DeleteModelVersion(ctx, "wardens", 2)
	if client.Code(err) != codes.FailedPrecondition {
		t.Fatalf("deleting an aliased version: %v; want FailedPrecondition", err)
	}
	if err := admin.DeleteModelVersion(ctx, "wardens", 1); err != nil {
		t.Fatal(err)
	}
	resp = td.rest(t, "DELETE", "/v1/models/wardens/versions/1", td.tokens.admin, nil)
	if resp.status != http.StatusNotFound {
		t.Fatalf("deleting a deleted version over REST: %d %s", resp.status, resp.body)
	}
	if _, err := c.Place(ctx, "wardens@1", frags[0].Siglum, frags[0].Readings); client.Code(err) != codes.NotFound {
		t.Fatalf("placing against a deleted version: %v", err)
	}

	// Health needs no token.
	hc, err := healthpb.NewHealthClient(td.client(t, "").Conn()).Check(ctx, &healthpb.HealthCheckRequest{})
	if err != nil || hc.GetStatus() != healthpb.HealthCheckResponse_SERVING {
		t.Fatalf("health: %v %v", hc, err)
	}
	for _, path := range []string{"/healthz", "/readyz"} {
		if resp := td.rest(t, "GET", path, "", nil); resp.status != 200 {
			t.Errorf("%s: %d %s", path, resp.status, resp.body)
		}
	}
}

// The OpenAPI document is served, is Swagger 2.0 (OpenAPI 2.0 specification: "swagger": "2.0",
// "info", "paths" are required) and uses the field names the REST answers use.
func TestOpenAPIDocument(t *testing.T) {
	td := startDaemon(t, nil)
	resp := td.rest(t, "GET", "/openapi.json", "", nil)
	if resp.status != 200 || !strings.HasPrefix(resp.header.Get("Content-Type"), "application/json") {
		t.Fatalf("/openapi.json: %d %s", resp.status, resp.header.Get("Content-Type"))
	}
	var doc struct {
		Swagger     string                                         `json:"swagger"`
		Info        map[string]any                                 `json:"info"`
		Paths       map[string]map[string]any                      `json:"paths"`
		Definitions map[string]struct{ Properties map[string]any } `json:"definitions"`
	}
	resp.decode(t, &doc)
	if doc.Swagger != "2.0" || doc.Info == nil {
		t.Fatalf("swagger %q, info %v", doc.Swagger, doc.Info)
	}
	for path, method := range map[string]string{
		"/v1/models": "get", "/v1/models/{model}": "get", "/v1/models/{model}/placements": "post",
		"/v1/models/{model}/suggestions": "post", "/v1/models/{name}/aliases/{alias}": "put",
	} {
		if _, ok := doc.Paths[path][method]; !ok {
			t.Errorf("OpenAPI lacks %s %s", strings.ToUpper(method), path)
		}
	}
	for _, f := range []string{"witness", "model", "best_group", "groups", "confidence", "covered_units", "unknown_readings"} {
		if _, ok := doc.Definitions["v1Placement"].Properties[f]; !ok {
			t.Errorf("OpenAPI v1Placement lacks %q", f)
		}
	}
}

// Metrics count requests per method and listener, placements, and the model cache.
func TestMetrics(t *testing.T) {
	td := startDaemon(t, nil)
	td.publishDemo(t, "demo")
	w := demoFragments(t)[0]
	if _, err := td.client(t, td.tokens.place).Place(context.Background(), "demo", w.Siglum, w.Readings); err != nil {
		t.Fatal(err)
	}
	if resp := td.rest(t, "POST", "/v1/models/demo/placements", td.tokens.place, placeBody(w)); resp.status != 200 {
		t.Fatal(resp.status)
	}
	td.rest(t, "POST", "/v1/models/demo/placements", "", placeBody(w))
	resp := td.rest(t, "GET", "/metrics", "", nil)
	text := string(resp.body)
	for _, want := range []string{
		`strayleaf_requests_total{code="OK",method="/strayleaf.v1.PlacementService/Place",via="grpc"} 1`,
		`strayleaf_requests_total{code="OK",method="/strayleaf.v1.PlacementService/Place",via="rest"} 1`,
		`strayleaf_requests_total{code="Unauthenticated",method="/strayleaf.v1.PlacementService/Place",via="rest"} 1`,
		`strayleaf_placements_total{model="demo",outcome="placed"} 2`,
		`strayleaf_request_duration_seconds_count{method="/strayleaf.v1.PlacementService/Place",via="grpc"} 1`,
		`strayleaf_model_cache_models 1`,
		`go_goroutines`,
	} {
		if !strings.Contains(text, want) {
			t.Errorf("/metrics lacks %s", want)
		}
	}
	if t.Failed() {
		t.Log(text[:min(len(text), 3000)])
	}
}

package api_test

import (
	"context"
	"net/http"
	"net/url"
	"reflect"
	"strconv"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc/codes"

	"strayleaf/api"
	"strayleaf/api/server"
	"strayleaf/client"
)

// Every kind of bad input gets its code and its details, the same over gRPC and REST (with the
// HTTP status grpc-gateway gives the code), and changes nothing in the store.
func TestBadInputAnswers(t *testing.T) {
	td := startDaemon(t, func(c *api.Config) {
		c.Limits = server.DefaultLimits()
		c.Limits.MaxUnitsPerWitness = 300
		c.Limits.MaxMessageBytes = 1 << 20
	})
	td.publishDemo(t, "demo")
	ctx := context.Background()
	c := td.client(t, td.tokens.place)
	frag := demoFragments(t)[0]
	u0, u1 := frag.Readings[0].Unit, frag.Readings[1].Unit
	with := func(extra ...client.Reading) []client.Reading {
		return append(append([]client.Reading(nil), frag.Readings...), extra...)
	}
	n := len(frag.Readings)
	many := make([]client.Reading, 301)
	for i := range many {
		many[i] = client.Reading{Unit: "u" + string(rune('a'+i%26)) + strings.Repeat("x", i/26), Reading: "r"}
	}
	huge := with(client.Reading{Unit: "oil.01", Reading: strings.Repeat("long", 300000)})

	type violation struct{ field, contains string }
	for _, tc := range []struct {
		name       string
		model      string
		witness    string
		readings   []client.Reading
		code       codes.Code
		httpStatus int
		violations []violation
	}{
		{"unknown model", "nosuch", "F", frag.Readings, codes.NotFound, 404, nil},
		{"unknown version", "demo@9", "F", frag.Readings, codes.NotFound, 404, nil},
		{"unknown alias", "demo@stable", "F", frag.Readings, codes.NotFound, 404, nil},
		{"malformed reference", "bad name", "F", frag.Readings, codes.InvalidArgument, 400, []violation{{"model", "invalid name"}}},
		{"unknown units", "demo", "F", with(client.Reading{Unit: "lamp.01", Reading: "a"}, client.Reading{Unit: "lamp.02", Reading: "b"}),
			codes.InvalidArgument, 400, []violation{{readingsUnit(n), `"lamp.01" is not in the model`}, {readingsUnit(n + 1), `"lamp.02" is not in the model`}}},
		{"unit given twice", "demo", "F", with(client.Reading{Unit: u1, Reading: "other"}),
			codes.InvalidArgument, 400, []violation{{readingsUnit(n), "given twice"}}},
		{"empty unit id", "demo", "F", with(client.Reading{Unit: "", Reading: "a"}), codes.InvalidArgument, 400, []violation{{readingsUnit(n), "empty unit id"}}},
		{"empty reading", "demo", "F", with(client.Reading{Unit: "oil.01", Reading: ""}), codes.InvalidArgument, 400, []violation{{"readings[" + strconv.Itoa(n) + "].reading", "empty reading"}}},
		{"no readings", "demo", "F", nil, codes.InvalidArgument, 400, []violation{{"readings", "no readings given"}}},
		{"no siglum", "demo", "", frag.Readings, codes.InvalidArgument, 400, []violation{{"witness", "empty siglum"}}},
		{"no siglum and a bad unit", "demo", "", with(client.Reading{Unit: "lamp.01", Reading: "a"}), codes.InvalidArgument, 400,
			[]violation{{"witness", "empty siglum"}, {readingsUnit(n), "not in the model"}}},
		{"too many readings", "demo", "F", many, codes.InvalidArgument, 400, []violation{{"readings", "301 readings; at most 300"}}},
		{"message too large", "demo", "F", huge, codes.ResourceExhausted, 413, nil},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := c.Place(ctx, tc.model, tc.witness, tc.readings)
			var e *client.Error
			if client.Code(err) != tc.code {
				t.Fatalf("gRPC: %v; want %v", err, tc.code)
			}
			if len(tc.violations) > 0 {
				e = err.(*client.Error)
				if len(e.Violations) != len(tc.violations) {
					t.Fatalf("gRPC violations %+v; want %d", e.Violations, len(tc.violations))
				}
				for i, v := range tc.violations {
					if e.Violations[i].Field != v.field || !strings.Contains(e.Violations[i].Description, v.contains) {
						t.Errorf("gRPC violation %d: %+v; want field %s containing %q", i, e.Violations[i], v.field, v.contains)
					}
				}
			}
			resp := td.rest(t, "POST", "/v1/models/"+url.PathEscape(tc.model)+"/placements", td.tokens.place,
				map[string]any{"witness": tc.witness, "readings": nonNilReadings(tc.readings)})
			if resp.status != tc.httpStatus {
				t.Fatalf("REST: %d %.300s; want %d", resp.status, resp.body, tc.httpStatus)
			}
			var re restError
			resp.decode(t, &re)
			if codes.Code(re.Code) != tc.code {
				t.Errorf("REST body code %d; want %d (%v)", re.Code, tc.code, tc.code)
			}
			if len(tc.violations) > 0 {
				if len(re.Details) != 1 || re.Details[0].Type != "type.googleapis.com/google.rpc.BadRequest" {
					t.Fatalf("REST details %s", resp.body)
				}
				got := re.Details[0].FieldViolations
				if len(got) != len(e.Violations) {
					t.Fatalf("REST violations %+v; gRPC %+v", got, e.Violations)
				}
				for i := range got {
					if got[i].Field != e.Violations[i].Field || got[i].Description != e.Violations[i].Description {
						t.Errorf("REST violation %d %+v differs from gRPC %+v", i, got[i], e.Violations[i])
					}
				}
			}
		})
	}

	// A reading the model does not know is accepted and reported.
	odd := with()
	odd[0].Reading = "zzunheard"
	p, err := c.Place(ctx, "demo", "F", odd)
	if err != nil || !contains(p.UnknownReadings, u0) {
		t.Errorf("unknown reading: %v, %v; want %s in unknown_readings", p, err, u0)
	}

	// Deadlines: an expired deadline is answered DeadlineExceeded, over REST with 504.
	dctx, cancel := context.WithTimeout(ctx, time.Nanosecond)
	defer cancel()
	if _, err := c.Place(dctx, "demo", "F", frag.Readings); client.Code(err) != codes.DeadlineExceeded {
		t.Errorf("expired deadline: %v", err)
	}
	if resp := td.rest(t, "POST", "/v1/models/demo/placements", td.tokens.place, placeBody(frag), "Grpc-Timeout", "1n"); resp.status != http.StatusGatewayTimeout {
		t.Errorf("REST with Grpc-Timeout 1n: %d %s", resp.status, resp.body)
	}

	// Malformed REST bodies.
	for _, body := range []string{`{"witness": "F", "readings": [`, `{"witness": "F", "colour": "red"}`, `{"witness": 3}`} {
		resp := td.rest(t, "POST", "/v1/models/demo/placements", td.tokens.place, body)
		if resp.status != 400 {
			t.Errorf("body %s: %d %s; want 400", body, resp.status, resp.body)
		}
		// The answer says what was expected, not only what the JSON decoder tripped on.
		if !strings.Contains(string(resp.body), "not the expected JSON object") {
			t.Errorf("body %s: answer %s does not say a JSON object was expected", body, resp.body)
		}
	}

	// Bad publishing and alias requests are refused and leave the store as it was.
	pub := td.client(t, td.tokens.publish)
	before, err := c.ListModels(ctx)
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		call func() error
		code codes.Code
	}{
		{"empty bundle", func() error { _, err := pub.PublishModel(ctx, "demo", nil, "", ""); return err }, codes.InvalidArgument},
		{"not a bundle", func() error {
			_, err := pub.PublishModel(ctx, "demo", []byte("not a bundle at all"), "", "")
			return err
		}, codes.InvalidArgument},
		{"damaged bundle", func() error {
			b := append([]byte(nil), demoModelBundle(t)...)
			b[len(b)/2] ^= 0xff
			_, err := pub.PublishModel(ctx, "demo", b, "", "")
			return err
		}, codes.InvalidArgument},
		{"bad model name", func() error { _, err := pub.PublishModel(ctx, "no/slash", demoModelBundle(t), "", ""); return err }, codes.InvalidArgument},
		{"bad alias on publish", func() error { _, err := pub.PublishModel(ctx, "demo", demoModelBundle(t), "", "9lives"); return err }, codes.InvalidArgument},
		{"alias to a missing version", func() error { _, err := pub.SetAlias(ctx, "demo", "stable", 7); return err }, codes.NotFound},
		{"alias of a missing model", func() error { _, err := pub.SetAlias(ctx, "nosuch", "stable", 1); return err }, codes.NotFound},
		{"alias to version 0", func() error { _, err := pub.SetAlias(ctx, "demo", "stable", 0); return err }, codes.InvalidArgument},
		{"numeric alias", func() error { _, err := pub.SetAlias(ctx, "demo", "2", 1); return err }, codes.InvalidArgument},
	} {
		if err := tc.call(); client.Code(err) != tc.code {
			t.Errorf("%s: %v; want %v", tc.name, err, tc.code)
		}
	}
	after, err := c.ListModels(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(before, after) {
		t.Errorf("bad requests changed the store: %+v -> %+v", before, after)
	}
	if resp := td.rest(t, "GET", "/v1/models/nosuch", td.tokens.place, nil); resp.status != 404 {
		t.Errorf("GET unknown model: %d", resp.status)
	}
}

func readingsUnit(i int) string { return "readings[" + strconv.Itoa(i) + "].unit" }

func nonNilReadings(rs []client.Reading) []client.Reading {
	if rs == nil {
		return []client.Reading{}
	}
	return rs
}

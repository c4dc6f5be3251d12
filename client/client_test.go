package client

import (
	"errors"
	"strings"
	"testing"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
)

func TestParseRef(t *testing.T) {
	r, err := ParseRef("demo@12")
	if err != nil || r != (Ref{"demo", 12}) || r.String() != "demo@12" {
		t.Fatalf("ParseRef(demo@12) = %v, %v", r, err)
	}
	for _, bad := range []string{"demo", "demo@", "demo@current", "@3", "demo@0", "demo@-1"} {
		if _, err := ParseRef(bad); err == nil {
			t.Errorf("ParseRef(%q) accepted", bad)
		}
	}
	if VersionRef("a", 2) != "a@2" || AliasRef("a", "stable") != "a@stable" {
		t.Error("VersionRef/AliasRef")
	}
}

func TestErrorCarriesViolationsAndHints(t *testing.T) {
	st, _ := status.New(codes.InvalidArgument, "witness X: 2 problems").WithDetails(&errdetails.BadRequest{
		FieldViolations: []*errdetails.BadRequest_FieldViolation{{Field: "readings[0].unit", Description: "unit \"q\" is not in the model"}}})
	c := &Client{addr: "127.0.0.1:1"}
	err := c.wrap("place X", st.Err())
	var e *Error
	if !errors.As(err, &e) || e.Code != codes.InvalidArgument || len(e.Violations) != 1 || e.Violations[0].Field != "readings[0].unit" {
		t.Fatalf("wrap: %#v", err)
	}
	if Code(err) != codes.InvalidArgument || status.Code(err) != codes.InvalidArgument {
		t.Errorf("Code(err) = %v, status.Code = %v", Code(err), status.Code(err))
	}
	if msg := err.Error(); !strings.Contains(msg, "readings[0].unit: unit \"q\"") || !strings.Contains(msg, "127.0.0.1:1") {
		t.Errorf("message %q", msg)
	}
	if msg := c.wrap("list", status.Error(codes.Unauthenticated, "no token")).Error(); !strings.Contains(msg, "--token") {
		t.Errorf("Unauthenticated without a hint: %q", msg)
	}
	if c.wrap("x", nil) != nil {
		t.Error("wrap(nil) != nil")
	}
}

func TestDialChecksAddressAndCA(t *testing.T) {
	if _, err := Dial(""); err == nil {
		t.Error("empty address accepted")
	}
	if _, err := Dial("https://example.invalid:1"); err == nil || !strings.Contains(err.Error(), "without a scheme") {
		t.Errorf("scheme accepted: %v", err)
	}
	if _, err := Dial("127.0.0.1:1", WithCAFile("/nonexistent/ca.pem")); err == nil {
		t.Error("missing CA file accepted")
	}
}

package client

import (
	"errors"
	"fmt"
	"strings"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
)

// FieldViolation names one bad field of a request, e.g. "readings[3].unit".
type FieldViolation struct {
	Field       string
	Description string
}

// Error is a call the server refused or could not answer.
type Error struct {
	// Op is what was asked ("place", "publish", ...).
	Op   string
	Addr string
	Code codes.Code
	// Message is the server's explanation.
	Message    string
	Violations []FieldViolation
	status     *status.Status
}

func (e *Error) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s: strayleafd at %s answered %s: %s", e.Op, e.Addr, e.Code, e.Message)
	for _, v := range e.Violations {
		fmt.Fprintf(&b, "\n  %s: %s", v.Field, v.Description)
	}
	if h := e.hint(); h != "" {
		b.WriteString("\n  (" + h + ")")
	}
	return b.String()
}

func (e *Error) hint() string {
	switch e.Code {
	case codes.Unauthenticated:
		return "give a valid token with --token or STRAYLEAF_TOKEN; `strayleaf token new` makes one, and the server's tokens file must list its hash"
	case codes.PermissionDenied:
		return "the token's role does not allow this: place < publish < admin"
	case codes.Unavailable:
		return "is strayleafd running there, and is TLS (a CA file) needed or not? see its log"
	case codes.DeadlineExceeded:
		return "the call took longer than its deadline"
	}
	return ""
}

// GRPCStatus lets status.Code and status.FromError read an *Error.
func (e *Error) GRPCStatus() *status.Status { return e.status }

// Code returns the gRPC code of err (codes.OK for nil, codes.Unknown for errors not from a call).
func Code(err error) codes.Code {
	var e *Error
	if errors.As(err, &e) {
		return e.Code
	}
	return status.Code(err)
}

// wrap turns a call's error into an *Error.
func (c *Client) wrap(op string, err error) error {
	if err == nil {
		return nil
	}
	st, ok := status.FromError(err)
	if !ok {
		return fmt.Errorf("%s: strayleafd at %s: %w", op, c.addr, err)
	}
	e := &Error{Op: op, Addr: c.addr, Code: st.Code(), Message: st.Message(), status: st}
	for _, d := range st.Details() {
		if br, ok := d.(*errdetails.BadRequest); ok {
			for _, v := range br.GetFieldViolations() {
				e.Violations = append(e.Violations, FieldViolation{Field: v.GetField(), Description: v.GetDescription()})
			}
		}
	}
	return e
}

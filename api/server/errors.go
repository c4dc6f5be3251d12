package server

import (
	"context"
	"errors"
	"fmt"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"strayleaf/modelstore"
	"strayleaf/placement/model"
	pb "strayleaf/proto/strayleaf/v1"
)

// problem is a refusal of one witness or one request, kept cheap until it is turned into a
// gRPC status (unary calls) or a WitnessError entry (streams).
type problem struct {
	code       codes.Code
	msg        string
	violations []*pb.FieldViolation
	dropped    int // violations beyond maxViolations, counted only
}

func (p *problem) Error() string { return p.msg }

func badRequest(msg string, v ...*pb.FieldViolation) *problem {
	return &problem{code: codes.InvalidArgument, msg: msg, violations: v}
}

func violation(field, format string, args ...any) *pb.FieldViolation {
	return &pb.FieldViolation{Field: field, Description: fmt.Sprintf(format, args...)}
}

// add appends violations, keeping at most maxViolations.
func (p *problem) add(v ...*pb.FieldViolation) {
	for _, x := range v {
		if len(p.violations) < maxViolations {
			p.violations = append(p.violations, x)
		} else {
			p.dropped++
		}
	}
}

// status returns the problem as a gRPC status error; field violations travel as an
// errdetails.BadRequest detail.
func (p *problem) status() error {
	msg := p.msg
	if p.dropped > 0 {
		msg = fmt.Sprintf("%s (%d more violations not listed)", msg, p.dropped)
	}
	st := status.New(p.code, msg)
	if len(p.violations) == 0 {
		return st.Err()
	}
	br := &errdetails.BadRequest{}
	for _, v := range p.violations {
		br.FieldViolations = append(br.FieldViolations, &errdetails.BadRequest_FieldViolation{Field: v.Field, Description: v.Description})
	}
	if withDetails, err := st.WithDetails(br); err == nil {
		st = withDetails
	}
	return st.Err()
}

// entry returns the problem as the error entry of a stream answer.
func (p *problem) entry() *pb.WitnessError {
	msg := p.msg
	if p.dropped > 0 {
		msg = fmt.Sprintf("%s (%d more violations not listed)", msg, p.dropped)
	}
	return &pb.WitnessError{Code: int32(p.code), Message: msg, FieldViolations: p.violations}
}

// fromInputError turns the model's per-unit complaints into field violations.
func fromInputError(e *model.InputError, extra ...*pb.FieldViolation) *problem {
	p := &problem{code: codes.InvalidArgument}
	p.add(extra...)
	for _, v := range e.Violations {
		p.add(&pb.FieldViolation{Field: v.Field, Description: v.Description})
	}
	n := len(p.violations) + p.dropped
	what := "problem"
	if n != 1 {
		what = "problems"
	}
	p.msg = fmt.Sprintf("witness %s: %d %s with the readings; see the field violations", siglumOrNone(e.Witness), n, what)
	if n == 1 {
		p.msg = fmt.Sprintf("witness %s: %s: %s", siglumOrNone(e.Witness), p.violations[0].Field, p.violations[0].Description)
	}
	return p
}

func siglumOrNone(w string) string {
	if w == "" {
		return "(no siglum)"
	}
	return w
}

// storeProblem maps a model-store error to a status. field names the request field that held
// the reference or name, for InvalidArgument.
func storeProblem(err error, field string) *problem {
	switch {
	case errors.Is(err, modelstore.ErrInvalidName):
		return badRequest(err.Error(), violation(field, "%v", err))
	case errors.Is(err, modelstore.ErrNotFound):
		return &problem{code: codes.NotFound, msg: err.Error()}
	case errors.Is(err, modelstore.ErrAliased):
		return &problem{code: codes.FailedPrecondition, msg: err.Error() + "; move or remove the aliases first"}
	case errors.Is(err, modelstore.ErrReadOnly):
		return &problem{code: codes.FailedPrecondition, msg: err.Error() + "; the daemon was started on a read-only store"}
	case errors.Is(err, modelstore.ErrCorrupt):
		return &problem{code: codes.DataLoss, msg: err.Error()}
	}
	return &problem{code: codes.Internal, msg: err.Error()}
}

// contextProblem returns the status for a finished context, or nil.
func contextProblem(ctx context.Context) *problem {
	if err := ctx.Err(); err != nil {
		st := status.FromContextError(err)
		return &problem{code: st.Code(), msg: "request " + st.Message()}
	}
	return nil
}

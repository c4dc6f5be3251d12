package server

import (
	"context"
	"slices"
	"sync"

	"google.golang.org/grpc"

	"strayleaf/api/wire"
	pb "strayleaf/proto/strayleaf/v1"
)

// placementServiceDesc is the generated PlacementService description with the handlers of
// Place and PlaceStream replaced by ones that decode their requests into a wire.Input (see
// package wire) instead of protobuf messages: a 400-unit witness then costs one copy of its
// bytes rather than 400 reading messages for the garbage collector. The methods, streams and
// names are the generated ones, so clients, the gateway and the interceptors see the same
// service.
var placementServiceDesc = func() grpc.ServiceDesc {
	d := pb.PlacementService_ServiceDesc
	d.Methods = slices.Clone(d.Methods)
	d.Streams = slices.Clone(d.Streams)
	for i := range d.Methods {
		if d.Methods[i].MethodName == "Place" {
			d.Methods[i].Handler = placeHandler
		}
	}
	for i := range d.Streams {
		if d.Streams[i].StreamName == "PlaceStream" {
			d.Streams[i].Handler = func(srv any, stream grpc.ServerStream) error { return srv.(*Server).placeStream(stream) }
		}
	}
	return d
}()

// inputs recycles decoded requests (their readings' memory).
var inputs = sync.Pool{New: func() any { return new(wire.Input) }}

func getInput() *wire.Input { return inputs.Get().(*wire.Input) }

func putInput(in *wire.Input) {
	in.Reset()
	inputs.Put(in)
}

// placeHandler is the unary handler of Place, shaped as the generated one: decode, then the
// interceptor chain, then the method. The interceptors see a *wire.Input as the request.
func placeHandler(srv any, ctx context.Context, dec func(any) error, interceptor grpc.UnaryServerInterceptor) (any, error) {
	in := getInput()
	// The answer holds no reference to the Input (its strings point into the request's bytes,
	// which are not recycled), so the Input can go back when the handler returns.
	defer putInput(in)
	if err := dec(in); err != nil {
		return nil, err
	}
	s := srv.(*Server)
	if interceptor == nil {
		return s.place(ctx, in)
	}
	info := &grpc.UnaryServerInfo{Server: srv, FullMethod: pb.PlacementService_Place_FullMethodName}
	return interceptor(ctx, in, info, func(ctx context.Context, req any) (any, error) {
		return s.place(ctx, req.(*wire.Input))
	})
}

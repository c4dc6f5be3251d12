// Package server implements the strayleaf gRPC services, PlacementService and ModelService,
// over a model store. It does no authentication itself: the daemon puts the interceptors of
// package auth in front of it and Policy says which role each method needs.
package server

import (
	"errors"
	"fmt"
	"log/slog"
	"runtime"

	"google.golang.org/grpc"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	"strayleaf/api/auth"
	"strayleaf/api/metrics"
	"strayleaf/modelstore"
	pb "strayleaf/proto/strayleaf/v1"
)

// Limits bound what one request may ask for. Requests over a limit are refused with a clear
// status and change nothing.
type Limits struct {
	// MaxUnitsPerWitness bounds the readings of one witness (InvalidArgument beyond it).
	MaxUnitsPerWitness int
	// MaxWitnessesPerStream bounds the witnesses of one PlaceStream call; the stream is ended
	// with ResourceExhausted after answering that many.
	MaxWitnessesPerStream int
	// MaxMessageBytes bounds one received message, a published bundle included. The daemon
	// gives it to the gRPC server (ResourceExhausted beyond it) and to the REST listener (413).
	MaxMessageBytes int
	// StreamWindow bounds the witnesses of one stream being placed or waiting to be sent.
	StreamWindow int
	// StreamWorkers is the number of goroutines placing the witnesses of one stream.
	StreamWorkers int
}

// DefaultLimits are the limits the daemon uses unless told otherwise.
func DefaultLimits() Limits {
	return Limits{
		MaxUnitsPerWitness:    20000,
		MaxWitnessesPerStream: 1000000,
		MaxMessageBytes:       16 << 20,
		StreamWindow:          256,
		StreamWorkers:         runtime.GOMAXPROCS(0),
	}
}

// Validate checks that every limit is positive.
func (l Limits) Validate() error {
	for _, f := range []struct {
		name string
		v    int
	}{{"max units per witness", l.MaxUnitsPerWitness}, {"max witnesses per stream", l.MaxWitnessesPerStream},
		{"max message bytes", l.MaxMessageBytes}, {"stream window", l.StreamWindow}, {"stream workers", l.StreamWorkers}} {
		if f.v < 1 {
			return fmt.Errorf("limits: %s is %d; expected at least 1", f.name, f.v)
		}
	}
	return nil
}

// maxViolations bounds the field violations of one error answer; the rest are counted.
const maxViolations = 100

// Options configure a Server.
type Options struct {
	Limits  Limits
	Metrics *metrics.Metrics // may be nil
	Logger  *slog.Logger     // nil: slog.Default()
}

// Server serves both services over one store.
type Server struct {
	pb.UnimplementedPlacementServiceServer
	pb.UnimplementedModelServiceServer
	store   *modelstore.Store
	limits  Limits
	metrics *metrics.Metrics
	log     *slog.Logger
	pools   workspacePools
}

// New returns a server over store.
func New(store *modelstore.Store, opt Options) (*Server, error) {
	if store == nil {
		return nil, errors.New("server: no model store")
	}
	if err := opt.Limits.Validate(); err != nil {
		return nil, fmt.Errorf("server: %w", err)
	}
	log := opt.Logger
	if log == nil {
		log = slog.Default()
	}
	return &Server{store: store, limits: opt.Limits, metrics: opt.Metrics, log: log}, nil
}

// Register adds both services to g.
func (s *Server) Register(g grpc.ServiceRegistrar) {
	g.RegisterService(&placementServiceDesc, s)
	pb.RegisterModelServiceServer(g, s)
}

// Policy is the role each method needs: place reads and places, publish publishes and moves
// aliases, admin deletes and exports. The health service is public.
func Policy() auth.Policy {
	return auth.Policy{
		healthpb.Health_Check_FullMethodName: auth.RoleNone,
		healthpb.Health_Watch_FullMethodName: auth.RoleNone,
		healthpb.Health_List_FullMethodName:  auth.RoleNone,

		pb.PlacementService_Place_FullMethodName:       auth.RolePlace,
		pb.PlacementService_PlaceStream_FullMethodName: auth.RolePlace,
		pb.PlacementService_Suggest_FullMethodName:     auth.RolePlace,
		pb.ModelService_ListModels_FullMethodName:      auth.RolePlace,
		pb.ModelService_GetModel_FullMethodName:        auth.RolePlace,

		pb.ModelService_PublishModel_FullMethodName: auth.RolePublish,
		pb.ModelService_ListHistory_FullMethodName:  auth.RolePlace,
		pb.ModelService_SetAlias_FullMethodName:     auth.RolePublish,
		pb.ModelService_RemoveAlias_FullMethodName:  auth.RolePublish,

		pb.ModelService_DeleteModelVersion_FullMethodName: auth.RoleAdmin,
		pb.ModelService_ExportModel_FullMethodName:        auth.RoleAdmin,
	}
}

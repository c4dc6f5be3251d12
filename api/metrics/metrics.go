// Package metrics keeps the daemon's Prometheus metrics: requests and latency per gRPC method
// (REST calls are counted too, since the gateway calls the gRPC server), placements per model
// and outcome, and the store's decoded-model cache.
package metrics

import (
	"context"
	"net/http"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
	"github.com/prometheus/client_golang/prometheus/promhttp"
	"google.golang.org/grpc"
	"google.golang.org/grpc/status"
)

// Metrics is the set of collectors of one daemon. Its methods may be called on a nil *Metrics,
// which records nothing.
type Metrics struct {
	reg        *prometheus.Registry
	requests   *prometheus.CounterVec
	duration   *prometheus.HistogramVec
	inFlight   *prometheus.GaugeVec
	placements *prometheus.CounterVec
}

// New makes the collectors and registers them, with the Go runtime and process collectors, in
// a fresh registry.
func New() *Metrics {
	m := &Metrics{
		reg: prometheus.NewRegistry(),
		requests: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "strayleaf_requests_total",
			Help: "RPCs finished, by method, status code and the listener they came through (grpc, or rest through the gateway).",
		}, []string{"method", "code", "via"}),
		duration: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Name:    "strayleaf_request_duration_seconds",
			Help:    "Time from an RPC's arrival to its answer, by method and listener.",
			Buckets: []float64{0.0001, 0.00025, 0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10},
		}, []string{"method", "via"}),
		inFlight: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Name: "strayleaf_requests_in_flight",
			Help: "RPCs being served now, by listener.",
		}, []string{"via"}),
		placements: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "strayleaf_placements_total",
			Help: "Witnesses answered by Place and PlaceStream, by model name and outcome (placed, rejected).",
		}, []string{"model", "outcome"}),
	}
	m.reg.MustRegister(m.requests, m.duration, m.inFlight, m.placements,
		collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	return m
}

// Registry returns the registry, for tests and for extra collectors.
func (m *Metrics) Registry() *prometheus.Registry { return m.reg }

// Handler serves the metrics in the Prometheus text format.
func (m *Metrics) Handler() http.Handler {
	return promhttp.HandlerFor(m.reg, promhttp.HandlerOpts{Registry: m.reg})
}

// Placed counts one witness answered with a placement (ok) or an error entry.
func (m *Metrics) Placed(model string, ok bool) {
	if m == nil {
		return
	}
	outcome := "placed"
	if !ok {
		outcome = "rejected"
	}
	m.placements.WithLabelValues(model, outcome).Inc()
}

// WatchCache exports the decoded-model cache of the store through stats.
func (m *Metrics) WatchCache(stats func() (models int, bytes int64)) {
	m.reg.MustRegister(
		prometheus.NewGaugeFunc(prometheus.GaugeOpts{
			Name: "strayleaf_model_cache_models",
			Help: "Decoded models held in the store's cache.",
		}, func() float64 { n, _ := stats(); return float64(n) }),
		prometheus.NewGaugeFunc(prometheus.GaugeOpts{
			Name: "strayleaf_model_cache_bytes",
			Help: "Estimated memory of the decoded models in the store's cache.",
		}, func() float64 { _, b := stats(); return float64(b) }),
	)
}

func (m *Metrics) observe(method, via string, start time.Time, err error) {
	m.requests.WithLabelValues(method, status.Code(err).String(), via).Inc()
	m.duration.WithLabelValues(method, via).Observe(time.Since(start).Seconds())
}

// UnaryInterceptor records every unary call that comes through a server built for via.
func (m *Metrics) UnaryInterceptor(via string) grpc.UnaryServerInterceptor {
	g := m.inFlight.WithLabelValues(via)
	return func(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
		start := time.Now()
		g.Inc()
		resp, err := handler(ctx, req)
		g.Dec()
		m.observe(info.FullMethod, via, start, err)
		return resp, err
	}
}

// StreamInterceptor records every streaming call that comes through a server built for via.
func (m *Metrics) StreamInterceptor(via string) grpc.StreamServerInterceptor {
	g := m.inFlight.WithLabelValues(via)
	return func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, handler grpc.StreamHandler) error {
		start := time.Now()
		g.Inc()
		err := handler(srv, ss)
		g.Dec()
		m.observe(info.FullMethod, via, start, err)
		return err
	}
}

package api_test

import (
	"context"
	"fmt"
	"math/rand/v2"
	"net"
	"slices"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/metadata"

	"strayleaf/api/wire"
	"strayleaf/client"
	"strayleaf/placement/model"
	pb "strayleaf/proto/strayleaf/v1"
)

// The speed goals of the service, measured on loopback against the in-process daemon with auth
// on, in one run:
//
//	go test -run '^$' -bench 'HealthCheck|PlaceUnary|PlaceStream|Floor' -benchtime 3s ./api/
//
// Unary Place of a 400-unit witness against a k = 12 model is asked to reach at least 70% of
// the throughput of the gRPC health check (compare the calls/s of BenchmarkPlaceUnary and
// BenchmarkHealthCheck), and PlaceStream at least 20,000 witnesses/s. BenchmarkFloor measures
// what the first goal can reach at most: the same pair of calls on a bare server where Place
// places nothing. Each benchmark reports its throughput, its CPU time per call (client and
// server: they share the machine) and the p50 and p99 latency of its calls.

const (
	benchUnits   = 400
	benchGroups  = 12
	benchReads   = 4 // readings per unit
	benchClients = 4 // connections of the load generator
)

// synthPreferences[g][u] is the reading group g prefers at unit u, drawn at random (seeded).
func synthPreferences(n, k int, seed uint64) [][]int {
	rng := rand.New(rand.NewPCG(seed, 3))
	pref := make([][]int, k)
	for g := range pref {
		pref[g] = make([]int, n)
		for u := range pref[g] {
			pref[g][u] = rng.IntN(benchReads)
		}
	}
	return pref
}

// synthModel is a k-group model over n units with four readings each: group g prefers one
// reading at every unit (loading near 1, the others near 0.05), seeded.
func synthModel(n, k int, seed uint64) *pb.Model {
	rng := rand.New(rand.NewPCG(seed, 1))
	pref := synthPreferences(n, k, seed)
	m := &pb.Model{GroupCount: int32(k), Prepare: &pb.PrepareSettings{MinSupport: 2, MinCoverage: 0.5, Idf: true}}
	for u := range n {
		un := &pb.ModelUnit{Id: fmt.Sprintf("u%03d", u+1), Section: fmt.Sprintf("s%d", u/100+1), RowStart: int32(len(m.Rows))}
		for r := range benchReads {
			un.Readings = append(un.Readings, fmt.Sprintf("r%d", r))
			m.Rows = append(m.Rows, &pb.ProfileRow{Unit: int32(u), Reading: int32(r), Support: 5, Weight: 1 + rng.Float64()})
			for g := range k {
				v := 0.05 * rng.Float64()
				if pref[g][u] == r {
					v = 0.8 + 0.2*rng.Float64()
				}
				m.Profile = append(m.Profile, v)
			}
		}
		un.RowEnd = int32(len(m.Rows))
		m.Units = append(m.Units, un)
	}
	for g := range k {
		m.Groups = append(m.Groups, &pb.GroupSummary{Id: fmt.Sprintf("G%d", g+1)})
	}
	return m
}

// synthWitness reads every unit as group g would, with one reading in ten changed.
func synthWitness(n, k, g int, seed uint64) *pb.PlaceRequest {
	rng := rand.New(rand.NewPCG(seed, 2))
	pref := synthPreferences(n, k, seed)
	req := &pb.PlaceRequest{Model: "bench", Witness: "W400"}
	for u := range n {
		r := pref[g][u]
		if rng.IntN(10) == 0 {
			r = rng.IntN(benchReads)
		}
		req.Readings = append(req.Readings, &pb.WitnessReading{Unit: fmt.Sprintf("u%03d", u+1), Reading: fmt.Sprintf("r%d", r)})
	}
	return req
}

type benchEnv struct {
	td    *testDaemon
	conns []*grpc.ClientConn
	req   *pb.PlaceRequest
	ctx   context.Context // carries the place token
}

func newBenchEnv(b *testing.B) *benchEnv {
	b.Helper()
	td := startDaemon(b, nil)
	bundle, err := model.EncodeBundle(synthModel(benchUnits, benchGroups, 1))
	if err != nil {
		b.Fatal(err)
	}
	if _, err := td.client(b, td.tokens.publish).PublishModel(context.Background(), "bench", bundle, "", ""); err != nil {
		b.Fatal(err)
	}
	env := &benchEnv{td: td, req: synthWitness(benchUnits, benchGroups, 3, 1),
		ctx: metadata.AppendToOutgoingContext(context.Background(), "authorization", "Bearer "+td.tokens.place)}
	env.conns = dialBench(b, td.GRPCAddr())
	// The answer is a real placement, in the group the witness was drawn from.
	resp, err := pb.NewPlacementServiceClient(env.conns[0]).Place(env.ctx, env.req)
	if err != nil {
		b.Fatal(err)
	}
	if p := resp.GetPlacement(); p.GetBestGroup() != "G4" || p.GetCoveredUnits() != benchUnits {
		b.Fatalf("bench placement: best %s, %d units", p.GetBestGroup(), p.GetCoveredUnits())
	}
	return env
}

// dialBench opens the load generator's connections to addr.
func dialBench(b *testing.B, addr string) []*grpc.ClientConn {
	var conns []*grpc.ClientConn
	for range benchClients {
		conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()),
			grpc.WithDefaultCallOptions(grpc.ForceCodecV2(wire.Codec())))
		if err != nil {
			b.Fatal(err)
		}
		b.Cleanup(func() { conn.Close() })
		conns = append(conns, conn)
	}
	return conns
}

// runParallel calls call from many goroutines spread over the connections and reports calls/s
// and the p50 and p99 latency.
func (env *benchEnv) runParallel(b *testing.B, call func(conn *grpc.ClientConn) error) {
	var (
		mu   sync.Mutex
		lats []time.Duration
		next atomic.Int64
	)
	b.SetParallelism(8)
	b.ReportAllocs()
	b.ResetTimer()
	start, cpu0 := time.Now(), cpuTime()
	b.RunParallel(func(pb *testing.PB) {
		conn := env.conns[int(next.Add(1))%len(env.conns)]
		local := make([]time.Duration, 0, 1024)
		for pb.Next() {
			t0 := time.Now()
			if err := call(conn); err != nil {
				b.Error(err)
				return
			}
			local = append(local, time.Since(t0))
		}
		mu.Lock()
		lats = append(lats, local...)
		mu.Unlock()
	})
	elapsed, cpu := time.Since(start), cpuTime()-cpu0
	b.StopTimer()
	reportLatency(b, lats)
	b.ReportMetric(float64(len(lats))/elapsed.Seconds(), "calls/s")
	b.ReportMetric(float64(cpu.Microseconds())/float64(len(lats)), "cpu-µs/call")
}

// cpuTime is the CPU time this process has used (user and system): the load generator and
// the daemon together, which is what one call costs the machine. On a busy machine it is a
// steadier measure than wall time.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

func reportLatency(b *testing.B, lats []time.Duration) {
	if len(lats) == 0 {
		return
	}
	slices.Sort(lats)
	q := func(p float64) float64 { return float64(lats[int(p*float64(len(lats)-1))].Microseconds()) }
	b.ReportMetric(q(0.50), "p50-µs")
	b.ReportMetric(q(0.99), "p99-µs")
}

// BenchmarkHealthCheck is the baseline: the cheapest unary gRPC call the daemon answers.
func BenchmarkHealthCheck(b *testing.B) {
	env := newBenchEnv(b)
	req := &healthpb.HealthCheckRequest{}
	env.runParallel(b, func(conn *grpc.ClientConn) error {
		_, err := healthpb.NewHealthClient(conn).Check(env.ctx, req)
		return err
	})
}

// BenchmarkPlaceUnary places a 400-unit witness against a 12-group model per call.
func BenchmarkPlaceUnary(b *testing.B) {
	env := newBenchEnv(b)
	env.runParallel(b, func(conn *grpc.ClientConn) error {
		_, err := pb.NewPlacementServiceClient(conn).Place(env.ctx, env.req)
		return err
	})
}

// BenchmarkPlaceStream sends b.N 400-unit witnesses over streams (one per connection), reading
// answers while sending; it reports witnesses/s and the latency from send to answer.
func BenchmarkPlaceStream(b *testing.B) {
	for _, streams := range []int{1, 2} {
		b.Run(fmt.Sprintf("streams=%d", streams), func(b *testing.B) {
			env := newBenchEnv(b)
			msg := &pb.PlaceStreamRequest{Model: env.req.Model, Witness: env.req.Witness, Readings: env.req.Readings}
			b.ReportAllocs()
			b.ResetTimer()
			start, cpu0 := time.Now(), cpuTime()
			var wg sync.WaitGroup
			lats := make([][]time.Duration, streams)
			for s := range streams {
				n := b.N / streams
				if s < b.N%streams {
					n++
				}
				wg.Add(1)
				go func() {
					defer wg.Done()
					lats[s] = streamOnce(b, env.ctx, env.conns[s], msg, n)
				}()
			}
			wg.Wait()
			elapsed, cpu := time.Since(start), cpuTime()-cpu0
			b.StopTimer()
			reportLatency(b, slices.Concat(lats...))
			b.ReportMetric(float64(b.N)/elapsed.Seconds(), "witnesses/s")
			b.ReportMetric(float64(cpu.Microseconds())/float64(b.N), "cpu-µs/witness")
		})
	}
}

func streamOnce(b *testing.B, ctx context.Context, conn *grpc.ClientConn, msg *pb.PlaceStreamRequest, n int) []time.Duration {
	stream, err := pb.NewPlacementServiceClient(conn).PlaceStream(ctx)
	if err != nil {
		b.Error(err)
		return nil
	}
	sent := make([]atomic.Int64, n)
	go func() {
		for i := range n {
			sent[i].Store(time.Now().UnixNano())
			if err := stream.Send(msg); err != nil {
				return
			}
		}
		stream.CloseSend()
	}()
	lats := make([]time.Duration, 0, n)
	for i := range n {
		resp, err := stream.Recv()
		if err != nil {
			b.Errorf("answer %d: %v", i, err)
			return lats
		}
		if resp.GetPlacement() == nil {
			b.Errorf("answer %d: %v", i, resp.GetError())
			return lats
		}
		lats = append(lats, time.Duration(time.Now().UnixNano()-sent[i].Load()))
	}
	return lats
}

// BenchmarkClientPlaceAll sends b.N 400-unit witnesses through the Go client's PlaceAll (one
// stream), which builds each request from the client's own readings: the pipeline's view of
// PlaceStream, client costs included.
func BenchmarkClientPlaceAll(b *testing.B) {
	env := newBenchEnv(b)
	c := env.td.client(b, env.td.tokens.place)
	rs := make([]client.Reading, len(env.req.Readings))
	for i, r := range env.req.Readings {
		rs[i] = client.Reading{Unit: r.Unit, Reading: r.Reading}
	}
	ws := make([]client.Witness, b.N)
	for i := range ws {
		ws[i] = client.Witness{Siglum: env.req.Witness, Readings: rs}
	}
	b.ReportAllocs()
	b.ResetTimer()
	start, cpu0 := time.Now(), cpuTime()
	err := c.PlaceAll(context.Background(), "bench", ws, func(r client.StreamResult) error {
		if r.Err != nil {
			return r.Err
		}
		return nil
	})
	elapsed, cpu := time.Since(start), cpuTime()-cpu0
	b.StopTimer()
	if err != nil {
		b.Fatal(err)
	}
	b.ReportMetric(float64(b.N)/elapsed.Seconds(), "witnesses/s")
	b.ReportMetric(float64(cpu.Microseconds())/float64(b.N), "cpu-µs/witness")
}

// BenchmarkFloor is what gRPC alone costs for the two calls the unary goal compares, on a bare
// server (the same codec; no interceptors, store or model): the health check, and a Place whose
// handler decodes the 400-unit request into a wire.Input, as the daemon does, and answers with
// a copy of the daemon's real answer without placing anything. The ratio of their throughputs
// is the most any placement can reach against the health check on this transport.
func BenchmarkFloor(b *testing.B) {
	env := newBenchEnv(b)
	answer, err := pb.NewPlacementServiceClient(env.conns[0]).Place(env.ctx, env.req)
	if err != nil {
		b.Fatal(err)
	}
	inputs := sync.Pool{New: func() any { return new(wire.Input) }}
	place := func(_ any, _ context.Context, dec func(any) error, _ grpc.UnaryServerInterceptor) (any, error) {
		in := inputs.Get().(*wire.Input)
		defer func() { in.Reset(); inputs.Put(in) }()
		if err := dec(in); err != nil {
			return nil, err
		}
		if len(in.Readings) != benchUnits {
			return nil, fmt.Errorf("decoded %d readings; sent %d", len(in.Readings), benchUnits)
		}
		return answer, nil
	}
	g := grpc.NewServer(grpc.ForceServerCodecV2(wire.Codec()))
	g.RegisterService(&grpc.ServiceDesc{ServiceName: pb.PlacementService_ServiceDesc.ServiceName,
		Methods: []grpc.MethodDesc{{MethodName: "Place", Handler: place}}}, nil)
	healthpb.RegisterHealthServer(g, health.NewServer())
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		b.Fatal(err)
	}
	go g.Serve(lis)
	b.Cleanup(g.Stop)
	bare := &benchEnv{conns: dialBench(b, lis.Addr().String()), ctx: context.Background()}
	b.Run("health", func(b *testing.B) {
		req := &healthpb.HealthCheckRequest{}
		bare.runParallel(b, func(conn *grpc.ClientConn) error {
			_, err := healthpb.NewHealthClient(conn).Check(bare.ctx, req)
			return err
		})
	})
	b.Run("place-nothing", func(b *testing.B) {
		bare.runParallel(b, func(conn *grpc.ClientConn) error {
			_, err := pb.NewPlacementServiceClient(conn).Place(bare.ctx, env.req)
			return err
		})
	})
}

// BenchmarkModelPlaceDirect is the placement alone, without the service around it, for
// telling the service's cost from the model's.
func BenchmarkModelPlaceDirect(b *testing.B) {
	m, err := model.FromProto(synthModel(benchUnits, benchGroups, 1))
	if err != nil {
		b.Fatal(err)
	}
	req := synthWitness(benchUnits, benchGroups, 3, 1)
	rs := make([]model.Reading, len(req.Readings))
	for i, r := range req.Readings {
		rs[i] = model.Reading{Unit: r.Unit, Reading: r.Reading}
	}
	ws := m.Engine().NewWorkspace()
	b.ReportAllocs()
	cpu0, n := cpuTime(), 0
	for b.Loop() {
		if _, err := m.Place("W400", rs, ws); err != nil {
			b.Fatal(err)
		}
		n++
	}
	b.ReportMetric(float64((cpuTime()-cpu0).Microseconds())/float64(n), "cpu-µs/call")
}

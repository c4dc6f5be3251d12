package server

import (
	"context"
	"errors"
	"io"
	"runtime"
	"sync"
	"weak"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"strayleaf/api/wire"
	"strayleaf/modelstore"
	"strayleaf/placement"
	"strayleaf/placement/model"
	pb "strayleaf/proto/strayleaf/v1"
)

// scratch is the per-goroutine memory of placements against one model.
type scratch struct {
	ws *placement.Workspace
}

// workspacePools keeps one pool of scratch memory per decoded model. The key is a weak pointer,
// so a model the store's cache has dropped can be collected; its pool goes with it.
type workspacePools struct{ m sync.Map } // weak.Pointer[model.Model] -> *sync.Pool

func (p *workspacePools) pool(m *model.Model) *sync.Pool {
	key := weak.Make(m)
	if v, ok := p.m.Load(key); ok {
		return v.(*sync.Pool)
	}
	// The pool must not hold m itself, or m would never become unreachable.
	eng := m.Engine()
	fresh := &sync.Pool{New: func() any { return &scratch{ws: eng.NewWorkspace()} }}
	v, loaded := p.m.LoadOrStore(key, fresh)
	if !loaded {
		runtime.AddCleanup(m, func(k weak.Pointer[model.Model]) { p.m.Delete(k) }, key)
	}
	return v.(*sync.Pool)
}

// resolve finds the model a reference names.
func (s *Server) resolve(ref, field string) (*model.Model, modelstore.Ref, *problem) {
	if ref == "" {
		return nil, modelstore.Ref{}, badRequest("no model reference given", violation(field, "empty; expected \"name\", \"name@3\" or \"name@alias\""))
	}
	m, r, err := s.store.Model(ref)
	if err != nil {
		return nil, modelstore.Ref{}, storeProblem(err, field)
	}
	return m, r, nil
}

// placeAsk is what a request asks for beyond the placement itself.
type placeAsk struct {
	// nearest is how many nearest training witnesses to name (0: none).
	nearest int32
	// bySection asks for each section's placement and the block-mixture reading.
	bySection bool
}

// placeOne checks and places one witness. ref is the version used, for the answer.
func (s *Server) placeOne(ctx context.Context, m *model.Model, ref string, witness string, rs []model.Reading, ask placeAsk) (*pb.Placement, *problem) {
	if p := contextProblem(ctx); p != nil {
		return nil, p
	}
	if n := len(rs); n > s.limits.MaxUnitsPerWitness {
		return nil, badRequest("witness "+siglumOrNone(witness)+": too many readings",
			violation("readings", "%d readings; at most %d per witness", n, s.limits.MaxUnitsPerWitness))
	}
	var bad []*pb.FieldViolation
	if witness == "" {
		bad = append(bad, violation("witness", "empty siglum; name the witness or fragment"))
	}
	if ask.nearest < 0 {
		bad = append(bad, violation("nearest", "%d; expected 0 (none) or more nearest training witnesses", ask.nearest))
	}
	pool := s.pools.pool(m)
	sc := pool.Get().(*scratch)
	defer pool.Put(sc)
	var (
		pl  *model.Placement
		err error
	)
	if bad != nil {
		_, _, err = m.Observe(witness, rs, nil)
		if err == nil {
			msg := "witness has no siglum"
			if witness != "" {
				msg = "witness " + witness + ": bad placement request"
			}
			return nil, badRequest(msg, bad...)
		}
	} else {
		// Nearest witnesses cost a comparison with every training witness: only when asked.
		// No more can be named than the model has training witnesses; the cap keeps a huge
		// request from sizing the answer's buffer.
		nearest := min(int(ask.nearest), len(m.Proto().GetTrainingWitnesses()))
		pl, err = m.PlaceWith(witness, rs, sc.ws, model.PlaceOptions{Nearest: nearest})
	}
	if err != nil {
		return nil, placeProblem(err, ref, bad)
	}
	out := placementProto(ref, pl)
	if ask.bySection {
		sp, err := m.PlaceBySection(witness, rs, sc.ws)
		if err != nil {
			if errors.Is(err, model.ErrNoSections) {
				return nil, &problem{code: codes.FailedPrecondition, msg: "witness " + witness + ": cannot place by section: " + ref + ": " + err.Error(),
					violations: []*pb.FieldViolation{violation("by_section", "%s has no sections; ask without by_section", ref)}}
			}
			return nil, placeProblem(err, ref, nil)
		}
		addSections(out, sp)
	}
	return out, nil
}

// placeProblem turns a placement error into the answer's problem.
func placeProblem(err error, ref string, extra []*pb.FieldViolation) *problem {
	var in *model.InputError
	switch {
	case errors.As(err, &in):
		return fromInputError(in, extra...)
	case errors.Is(err, model.ErrNoCoverage):
		return badRequest(err.Error(), violation("readings", "none of the units given carries grouping signal in %s; check more units", ref))
	}
	return &problem{code: codes.Internal, msg: err.Error()}
}

// placementProto converts a placement for the wire, with one allocation for all group shares.
func placementProto(ref string, p *model.Placement) *pb.Placement {
	shares := make([]pb.GroupShare, len(p.Groups))
	groups := make([]*pb.GroupShare, len(p.Groups))
	for i, g := range p.Groups {
		shares[i].Group, shares[i].Share = g.Group, g.Share
		groups[i] = &shares[i]
	}
	out := &pb.Placement{
		Model: ref, Witness: p.Witness, BestGroup: p.BestGroup, Groups: groups, Confidence: p.Confidence,
		CoveredUnits: int32(p.CoveredUnits), UnknownReadings: p.UnknownReadings, UsedUnits: int32(p.UsedUnits),
		UninformativeUnits: p.UninformativeUnits, RelativeResidual: p.RelativeResidual,
		InformativeCoverage: p.InformativeCoverage, Calibrated: p.Calibrated, Mixed: p.Mixed,
	}
	if mx := p.Mixture; mx != nil {
		out.Mixture = &pb.Mixture{Primary: mx.Primary, Secondary: mx.Secondary, SecondaryShare: mx.Share,
			LikelihoodShare: mx.LikelihoodShare, LikelihoodRatio: mx.LikelihoodRatio}
	}
	if len(p.Nearest) > 0 {
		near := make([]pb.Neighbour, len(p.Nearest))
		out.Nearest = make([]*pb.Neighbour, len(p.Nearest))
		for i, n := range p.Nearest {
			near[i].Witness, near[i].BestGroup, near[i].Agreement = n.Witness, n.BestGroup, n.Agreement
			near[i].Agree, near[i].UnitsCompared = int32(n.Agree), int32(n.Compared)
			out.Nearest[i] = &near[i]
		}
	}
	return out
}

// addSections copies a placement by section into out.
func addSections(out *pb.Placement, sp *model.SectionedPlacement) {
	block := sp.BlockMixture
	out.BlockMixture = &block
	out.Sections = make([]*pb.SectionPlacement, len(sp.Sections))
	for i, s := range sp.Sections {
		out.Sections[i] = &pb.SectionPlacement{Section: s.Section, BestGroup: s.BestGroup, Confidence: s.Confidence, CoveredUnits: int32(s.CoveredUnits)}
	}
	out.BlockChanges = make([]*pb.BlockChange, len(sp.Changes))
	for i, c := range sp.Changes {
		out.BlockChanges[i] = &pb.BlockChange{AfterSection: c.After, AtSection: c.At, FromGroup: c.From, ToGroup: c.To}
	}
}

// Place places one partial witness. The registered handler decodes requests straight into a
// wire.Input and calls place (see placementServiceDesc); Place is the same for a caller that
// holds a protobuf request.
func (s *Server) Place(ctx context.Context, req *pb.PlaceRequest) (*pb.PlaceResponse, error) {
	in := getInput()
	defer putInput(in)
	in.FromRequest(req)
	return s.place(ctx, in)
}

// place places the witness of a decoded Place request.
func (s *Server) place(ctx context.Context, in *wire.Input) (*pb.PlaceResponse, error) {
	m, r, prob := s.resolve(in.Model, "model")
	if prob != nil {
		return nil, prob.status()
	}
	p, prob := s.placeOne(ctx, m, r.String(), in.Witness, in.Readings, placeAsk{nearest: in.Nearest, bySection: in.BySection})
	s.metrics.Placed(r.Name, prob == nil)
	if prob != nil {
		return nil, prob.status()
	}
	return &pb.PlaceResponse{Placement: p}, nil
}

// Suggest names the units worth checking next for a witness, by the model's expected
// information gain; a witness with no readings yet gets the model's probe list.
func (s *Server) Suggest(ctx context.Context, req *pb.SuggestRequest) (*pb.SuggestResponse, error) {
	m, r, prob := s.resolve(req.GetModel(), "model")
	if prob != nil {
		return nil, prob.status()
	}
	if p := contextProblem(ctx); p != nil {
		return nil, p.status()
	}
	var bad []*pb.FieldViolation
	if req.GetWitness() == "" {
		bad = append(bad, violation("witness", "empty siglum; name the witness or fragment"))
	}
	if n := req.GetMaxUnits(); n < 0 {
		bad = append(bad, violation("max_units", "%d; expected 0 (the default, 10) or more", n))
	}
	if n := len(req.GetReadings()); n > s.limits.MaxUnitsPerWitness {
		bad = append(bad, violation("readings", "%d readings; at most %d per witness", n, s.limits.MaxUnitsPerWitness))
	}
	if n := len(req.GetCandidates()); n > s.limits.MaxUnitsPerWitness {
		bad = append(bad, violation("candidates", "%d candidate units; at most %d", n, s.limits.MaxUnitsPerWitness))
	}
	if len(bad) > 0 {
		return nil, badRequest("witness "+siglumOrNone(req.GetWitness())+": bad suggestion request", bad...).status()
	}
	rs := make([]model.Reading, len(req.GetReadings()))
	for i, x := range req.GetReadings() {
		rs[i] = model.Reading{Unit: x.GetUnit(), Reading: x.GetReading()}
	}
	top := int(min(req.GetMaxUnits(), int32(len(m.Proto().GetUnits()))))
	opt := model.SuggestOptions{Top: top}
	if req.GetCandidates() != nil {
		opt.Candidates = req.GetCandidates()
	}
	sg, err := m.Suggest(req.GetWitness(), rs, opt)
	if err != nil {
		var in *model.InputError
		if errors.As(err, &in) {
			return nil, fromInputError(in).status()
		}
		return nil, status.Error(codes.Internal, err.Error())
	}
	return suggestionsProto(r.String(), sg), nil
}

func suggestionsProto(ref string, sg *model.Suggestions) *pb.SuggestResponse {
	out := &pb.SuggestResponse{Model: ref, Witness: sg.Witness, Probe: sg.Probe, EntropyBits: sg.Entropy,
		Posterior: make([]*pb.GroupShare, 0, len(sg.Posterior)), Units: make([]*pb.UnitSuggestion, 0, len(sg.Units))}
	for _, g := range sg.Posterior {
		out.Posterior = append(out.Posterior, &pb.GroupShare{Group: g.Group, Share: g.Share})
	}
	for _, u := range sg.Units {
		us := &pb.UnitSuggestion{Unit: u.Unit, Gain: u.Gain, Hints: make(map[string]string, len(u.Hints)), Readings: make([]*pb.ReadingHint, 0, len(u.Hints))}
		for _, h := range u.Hints {
			us.Hints[h.Reading] = h.Favours
			us.Readings = append(us.Readings, &pb.ReadingHint{Reading: h.Reading, Probability: h.Probability, Favours: h.Favours})
		}
		out.Units = append(out.Units, us)
	}
	return out
}

// streamSlot is one witness of a stream on its way through the placing workers.
type streamSlot struct {
	index int
	req   *wire.Input // recycled once the witness is placed
	m     *model.Model
	ref   modelstore.Ref
	prob  *problem
	resp  *pb.PlaceStreamResponse
	done  chan struct{}
}

// pinnedModel is a model reference as resolved once for a whole stream.
type pinnedModel struct {
	m    *model.Model
	ref  modelstore.Ref
	prob *problem
}

// PlaceStream places a stream of witnesses (see placeStream).
func (s *Server) PlaceStream(stream pb.PlacementService_PlaceStreamServer) error {
	return s.placeStream(stream)
}

// placeStream places a stream of witnesses, each received as a wire.Input. The receiving loop
// resolves each model reference once per stream, a pool of workers places the witnesses, and a
// sender answers them in the order they came; at most StreamWindow witnesses are in flight, so a slow reader of answers
// slows the sender of witnesses rather than filling memory.
func (s *Server) placeStream(stream grpc.ServerStream) error {
	ctx, cancel := context.WithCancel(stream.Context())
	defer cancel()
	window := make(chan *streamSlot, s.limits.StreamWindow)
	work := make(chan *streamSlot, s.limits.StreamWindow)

	var workers sync.WaitGroup
	for range s.limits.StreamWorkers {
		workers.Add(1)
		go func() {
			defer workers.Done()
			for sl := range work {
				s.placeSlot(ctx, sl)
				close(sl.done)
			}
		}()
	}
	sendErr := make(chan error, 1)
	go func() {
		var err error
		for sl := range window {
			<-sl.done
			if err == nil {
				if err = stream.SendMsg(sl.resp); err != nil {
					cancel()
				}
			}
		}
		sendErr <- err
	}()

	recvErr := s.receiveStream(ctx, stream, window, work)
	close(work)
	close(window)
	workers.Wait()
	if err := <-sendErr; err != nil {
		return err
	}
	return recvErr
}

// receiveStream reads witnesses until the client closes its side, and returns the error the
// stream ends with (nil for a clean end).
func (s *Server) receiveStream(ctx context.Context, stream grpc.ServerStream, window, work chan<- *streamSlot) error {
	pinned := map[string]pinnedModel{}
	last := ""
	for i := 0; ; i++ {
		req := getInput()
		err := stream.RecvMsg(req)
		if err == io.EOF {
			putInput(req)
			return nil
		}
		if err != nil {
			putInput(req)
			return err
		}
		if i >= s.limits.MaxWitnessesPerStream {
			err := status.Errorf(codes.ResourceExhausted, "more than %d witnesses in one stream; start another stream for the rest (witness %d, %s, and later ones were not placed)",
				s.limits.MaxWitnessesPerStream, i, siglumOrNone(req.Witness))
			putInput(req)
			return err
		}
		sl := &streamSlot{index: i, req: req, done: make(chan struct{})}
		ref := req.Model
		if ref == "" {
			ref = last
		}
		last = ref
		pm, ok := pinned[ref]
		if !ok {
			pm.m, pm.ref, pm.prob = s.resolve(ref, "model")
			pinned[ref] = pm
		}
		sl.m, sl.ref, sl.prob = pm.m, pm.ref, pm.prob
		select {
		case window <- sl:
		case <-ctx.Done():
			putInput(req)
			return status.FromContextError(ctx.Err()).Err()
		}
		work <- sl
	}
}

// placeSlot places one witness of a stream and fills its answer.
func (s *Server) placeSlot(ctx context.Context, sl *streamSlot) {
	defer func() { putInput(sl.req); sl.req = nil }()
	resp := &pb.PlaceStreamResponse{Index: int32(sl.index), Witness: sl.req.Witness}
	prob := sl.prob
	if prob == nil {
		var p *pb.Placement
		p, prob = s.placeOne(ctx, sl.m, sl.ref.String(), sl.req.Witness, sl.req.Readings,
			placeAsk{nearest: sl.req.Nearest, bySection: sl.req.BySection})
		s.metrics.Placed(sl.ref.Name, prob == nil)
		if prob == nil {
			resp.Result = &pb.PlaceStreamResponse_Placement{Placement: p}
		}
	}
	if prob != nil {
		resp.Result = &pb.PlaceStreamResponse_Error{Error: prob.entry()}
	}
	sl.resp = resp
}

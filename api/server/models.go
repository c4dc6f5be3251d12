package server

import (
	"context"
	"slices"
	"sort"

	"google.golang.org/protobuf/types/known/timestamppb"

	"strayleaf/api/auth"
	"strayleaf/modelstore"
	"strayleaf/placement/model"
	pb "strayleaf/proto/strayleaf/v1"
)

// ListModels lists every model with its versions and aliases, by name.
func (s *Server) ListModels(ctx context.Context, _ *pb.ListModelsRequest) (*pb.ListModelsResponse, error) {
	infos, err := s.store.List()
	if err != nil {
		return nil, storeProblem(err, "").status()
	}
	sort.Slice(infos, func(a, b int) bool { return infos[a].Name < infos[b].Name })
	out := &pb.ListModelsResponse{Models: make([]*pb.ModelSummary, 0, len(infos))}
	for _, mi := range infos {
		ms := &pb.ModelSummary{Name: mi.Name, Aliases: map[string]int32{}}
		for _, v := range mi.Versions {
			ms.Versions = append(ms.Versions, int32(v.Version))
			ms.LatestVersion = max(ms.LatestVersion, int32(v.Version))
		}
		slices.Sort(ms.Versions)
		for a, v := range mi.Aliases {
			ms.Aliases[a] = int32(v)
		}
		for _, v := range mi.Versions {
			ms.VersionDetails = append(ms.VersionDetails, versionInfoProto(v))
		}
		slices.SortFunc(ms.VersionDetails, func(a, b *pb.ModelVersionInfo) int { return int(a.Version - b.Version) })
		for _, a := range mi.AliasDetails {
			ms.AliasDetails = append(ms.AliasDetails, &pb.AliasInfo{Alias: a.Alias, Version: int32(a.Version), SetBy: a.By, SetTime: timestamppb.New(a.Set)})
		}
		out.Models = append(out.Models, ms)
	}
	return out, nil
}

func versionInfoProto(v modelstore.VersionInfo) *pb.ModelVersionInfo {
	sm := v.Summary
	return &pb.ModelVersionInfo{Version: int32(v.Version), PublishTime: timestamppb.New(v.Created), PublishedBy: v.By,
		Note: v.Note, BundleSha256: v.SHA256, BundleBytes: int32(v.Size),
		Summary: &pb.VersionSummary{FormatVersion: int32(sm.FormatVersion), GroupCount: int32(sm.Groups), UnitCount: int32(sm.Units),
			ProfileReadingCount: int32(sm.Rows), TrainingWitnessCount: int32(sm.TrainingWitnesses), Objective: sm.Objective,
			RelativeError: sm.RelativeError, CollationSha256: sm.CollationSHA256, Calibrated: sm.Calibrated}}
}

// GetModel describes the version a reference resolves to.
func (s *Server) GetModel(ctx context.Context, req *pb.GetModelRequest) (*pb.GetModelResponse, error) {
	m, r, prob := s.resolve(req.GetModel(), "model")
	if prob != nil {
		return nil, prob.status()
	}
	info, err := s.store.Info(r.String())
	if err != nil {
		return nil, storeProblem(err, "model").status()
	}
	mi, err := s.store.Describe(r.Name)
	if err != nil {
		return nil, storeProblem(err, "model").status()
	}
	return modelDetail(m, r, info, mi), nil
}

func modelDetail(m *model.Model, r modelstore.Ref, info modelstore.VersionInfo, mi modelstore.ModelInfo) *pb.GetModelResponse {
	mp := m.Proto()
	out := &pb.GetModelResponse{
		Model: r.String(), Name: r.Name, Version: int32(r.Version), VersionInfo: versionInfoProto(info),
		Aliases: []string{}, CollationSha256: mp.GetCollationSha256(), Prepare: mp.GetPrepare(), Train: mp.GetTrain(),
		Fit: mp.GetFit(), GroupCount: mp.GetGroupCount(), Groups: mp.GetGroups(),
		TrainingWitnessCount: int32(len(mp.GetTrainingWitnesses())), ProfileReadingCount: int32(len(mp.GetRows())),
		SetAside: &pb.SetAsideCounts{
			SingularReadings:     int32(len(mp.GetSetAside().GetSingularReadings())),
			UninformativeUnits:   int32(len(mp.GetSetAside().GetUninformativeUnits())),
			FragmentaryWitnesses: int32(len(mp.GetSetAside().GetFragmentaryWitnesses())),
		},
	}
	for a, v := range mi.Aliases {
		if v == r.Version {
			out.Aliases = append(out.Aliases, a)
		}
	}
	sort.Strings(out.Aliases)
	for _, u := range mp.GetUnits() {
		out.Units = append(out.Units, &pb.UnitInfo{Id: u.GetId(), Section: u.GetSection(), Readings: u.GetReadings(), Grouping: u.GetRowEnd() > u.GetRowStart()})
	}
	return out
}

// callerName is who the store records for a change.
func callerName(ctx context.Context) string {
	if id, ok := auth.FromContext(ctx); ok {
		return id.Name
	}
	return auth.AnonymousName
}

// PublishModel checks a bundle and stores it as the next version of a model.
func (s *Server) PublishModel(ctx context.Context, req *pb.PublishModelRequest) (*pb.PublishModelResponse, error) {
	if len(req.GetBundle()) == 0 {
		return nil, badRequest("no bundle given", violation("bundle", "empty; send the bytes of a model bundle (`strayleaf train` writes one)")).status()
	}
	if _, err := model.Decode(req.GetBundle()); err != nil {
		return nil, badRequest("the bundle was refused: "+err.Error(), violation("bundle", "%v", err)).status()
	}
	if p := contextProblem(ctx); p != nil {
		return nil, p.status()
	}
	by := callerName(ctx)
	r, err := s.store.Publish(req.GetName(), req.GetBundle(), modelstore.PublishMeta{By: by, Note: req.GetNote(), Alias: req.GetAlias()})
	if err != nil {
		return nil, storeProblem(err, nameOrAlias(req.GetName())).status()
	}
	info, err := s.store.Info(r.String())
	if err != nil {
		return nil, storeProblem(err, "name").status()
	}
	s.log.Info("model published", "model", r.String(), "by", by, "alias", req.GetAlias(), "bytes", len(req.GetBundle()))
	return &pb.PublishModelResponse{Model: r.String(), Version: int32(r.Version), VersionInfo: versionInfoProto(info)}, nil
}

// nameOrAlias is the request field at fault when a call naming a model and an alias is refused
// for a bad name: the model name if it is not valid, else the alias.
func nameOrAlias(name string) string {
	if modelstore.CheckModelName(name) != nil {
		return "name"
	}
	return "alias"
}

// SetAlias points an alias at a version.
func (s *Server) SetAlias(ctx context.Context, req *pb.SetAliasRequest) (*pb.SetAliasResponse, error) {
	if req.GetVersion() < 1 {
		return nil, badRequest("no version given", violation("version", "%d; expected a version number of at least 1", req.GetVersion())).status()
	}
	by := callerName(ctx)
	if err := s.store.SetAlias(req.GetName(), req.GetAlias(), int(req.GetVersion()), by); err != nil {
		return nil, storeProblem(err, nameOrAlias(req.GetName())).status()
	}
	r := modelstore.Ref{Name: req.GetName(), Version: int(req.GetVersion())}
	s.log.Info("alias set", "alias", req.GetName()+"@"+req.GetAlias(), "model", r.String(), "by", by)
	return &pb.SetAliasResponse{Model: r.String()}, nil
}

// RemoveAlias removes an alias.
func (s *Server) RemoveAlias(ctx context.Context, req *pb.RemoveAliasRequest) (*pb.RemoveAliasResponse, error) {
	by := callerName(ctx)
	if err := s.store.RemoveAlias(req.GetName(), req.GetAlias(), by); err != nil {
		return nil, storeProblem(err, nameOrAlias(req.GetName())).status()
	}
	s.log.Info("alias removed", "alias", req.GetName()+"@"+req.GetAlias(), "by", by)
	return &pb.RemoveAliasResponse{}, nil
}

// ListHistory lists the store's history, of one model or of all.
func (s *Server) ListHistory(ctx context.Context, req *pb.ListHistoryRequest) (*pb.ListHistoryResponse, error) {
	evs, err := s.store.History(req.GetName())
	if err != nil {
		return nil, storeProblem(err, "name").status()
	}
	out := &pb.ListHistoryResponse{Events: make([]*pb.HistoryEvent, 0, len(evs))}
	for _, e := range evs {
		out.Events = append(out.Events, &pb.HistoryEvent{Seq: int64(e.Seq), Time: timestamppb.New(e.Time), Kind: string(e.Kind), Name: e.Name,
			Version: int32(e.Version), Alias: e.Alias, FromVersion: int32(e.From), By: e.By, Detail: e.Detail})
	}
	return out, nil
}

// DeleteModelVersion removes one version that no alias points at.
func (s *Server) DeleteModelVersion(ctx context.Context, req *pb.DeleteModelVersionRequest) (*pb.DeleteModelVersionResponse, error) {
	if req.GetVersion() < 1 {
		return nil, badRequest("no version given", violation("version", "%d; expected a version number of at least 1", req.GetVersion())).status()
	}
	by := callerName(ctx)
	if err := s.store.DeleteVersion(req.GetName(), int(req.GetVersion()), by); err != nil {
		return nil, storeProblem(err, "name").status()
	}
	s.log.Info("model version deleted", "model", modelstore.Ref{Name: req.GetName(), Version: int(req.GetVersion())}.String(), "by", by)
	return &pb.DeleteModelVersionResponse{}, nil
}

// ExportModel returns the bundle bytes of a version as published.
func (s *Server) ExportModel(ctx context.Context, req *pb.ExportModelRequest) (*pb.ExportModelResponse, error) {
	if req.GetModel() == "" {
		return nil, badRequest("no model reference given", violation("model", "empty; expected \"name\", \"name@3\" or \"name@alias\"")).status()
	}
	b, info, err := s.store.Bundle(req.GetModel())
	if err != nil {
		return nil, storeProblem(err, "model").status()
	}
	return &pb.ExportModelResponse{Model: info.Ref().String(), Bundle: b, BundleSha256: info.SHA256}, nil
}

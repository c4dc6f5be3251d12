package client

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"math"
	"time"

	"google.golang.org/grpc/codes"

	"strayleaf/api/wire"
	"strayleaf/placement/model"
	pb "strayleaf/proto/strayleaf/v1"
)

// Reading is a witness's reading at one variation unit; lacunae are left out.
type Reading struct {
	Unit    string `json:"unit"`
	Reading string `json:"reading"`
}

// Witness is a partial witness to place.
type Witness struct {
	Siglum   string
	Readings []Reading
}

// GroupShare is one group's share of a placement.
type GroupShare struct {
	Group string  `json:"group"`
	Share float64 `json:"share"`
}

// Placement is where a witness falls among a model's groups, with the field names of
// `strayleaf place --json`.
type Placement struct {
	Witness            string       `json:"witness"`
	Model              string       `json:"model"`
	BestGroup          string       `json:"best_group"`
	Groups             []GroupShare `json:"groups"`
	Confidence         float64      `json:"confidence"`
	CoveredUnits       int          `json:"covered_units"`
	UsedUnits          int          `json:"used_units"`
	UnknownReadings    []string     `json:"unknown_readings"`
	UninformativeUnits []string     `json:"uninformative_units"`
	RelativeResidual   float64      `json:"relative_residual"`
	// InformativeCoverage is the share of the model's total informativeness the used units
	// carry; Calibrated says Confidence was read through the model's calibration.
	InformativeCoverage float64 `json:"informative_coverage"`
	Calibrated          bool    `json:"calibrated"`
	// Mixed is the mixture test's verdict on Mixture (nil with one group or no placement).
	Mixed   bool     `json:"mixed"`
	Mixture *Mixture `json:"mixture,omitempty"`
	// Nearest are the nearest training witnesses by agreement, when asked for
	// (PlaceOptions.Nearest).
	Nearest []Neighbour `json:"nearest,omitempty"`
	// Sections, BlockMixture and Changes are given when asked for (PlaceOptions.BySection).
	Sections     []SectionPlacement `json:"sections,omitempty"`
	BlockMixture *bool              `json:"block_mixture,omitempty"`
	Changes      []BlockChange      `json:"block_changes,omitempty"`
}

// Mixture is the mixture reading of a placement's two largest shares: SecondaryShare is the
// secondary group's share, LikelihoodShare its maximum-likelihood share under the groups'
// reading probabilities and LikelihoodRatio the statistic of the test behind Placement.Mixed.
type Mixture struct {
	Primary         string  `json:"primary"`
	Secondary       string  `json:"secondary"`
	SecondaryShare  float64 `json:"secondary_share"`
	LikelihoodShare float64 `json:"likelihood_share"`
	LikelihoodRatio float64 `json:"likelihood_ratio"`
}

// Neighbour is a training witness compared with the placed one: Agree of UnitsCompared units
// have the same reading (Agreement = Agree / UnitsCompared); BestGroup is its own group.
type Neighbour struct {
	Witness       string  `json:"witness"`
	BestGroup     string  `json:"best_group"`
	Agree         int     `json:"agree"`
	UnitsCompared int     `json:"units_compared"`
	Agreement     float64 `json:"agreement"`
}

// SectionPlacement is the placement of one section's readings (BestGroup empty and Confidence
// 0 when the section has no reading the model places by).
type SectionPlacement struct {
	Section      string  `json:"section"`
	BestGroup    string  `json:"best_group"`
	Confidence   float64 `json:"confidence"`
	CoveredUnits int     `json:"covered_units"`
}

// BlockChange is one change of exemplar: AfterSection is the last section placed with
// FromGroup, AtSection the first placed with ToGroup.
type BlockChange struct {
	AfterSection string `json:"after_section"`
	AtSection    string `json:"at_section"`
	FromGroup    string `json:"from_group"`
	ToGroup      string `json:"to_group"`
}

// PlaceOptions choose the optional parts of a placement.
type PlaceOptions struct {
	// Nearest is how many nearest training witnesses to name (0: none; they cost the server a
	// comparison with every training witness).
	Nearest int
	// BySection also places each section's readings separately and reads a block mixture
	// from them (the model's units must carry sections).
	BySection bool
}

func nonNil(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

func placementFrom(p *pb.Placement) *Placement {
	out := &Placement{Witness: p.GetWitness(), Model: p.GetModel(), BestGroup: p.GetBestGroup(), Confidence: p.GetConfidence(),
		CoveredUnits: int(p.GetCoveredUnits()), UsedUnits: int(p.GetUsedUnits()), UnknownReadings: nonNil(p.GetUnknownReadings()),
		UninformativeUnits: nonNil(p.GetUninformativeUnits()), RelativeResidual: p.GetRelativeResidual(),
		InformativeCoverage: p.GetInformativeCoverage(), Calibrated: p.GetCalibrated(), Mixed: p.GetMixed(),
		Groups: make([]GroupShare, len(p.GetGroups()))}
	for i, g := range p.GetGroups() {
		out.Groups[i] = GroupShare{Group: g.GetGroup(), Share: g.GetShare()}
	}
	if mx := p.GetMixture(); mx != nil {
		out.Mixture = &Mixture{Primary: mx.GetPrimary(), Secondary: mx.GetSecondary(), SecondaryShare: mx.GetSecondaryShare(),
			LikelihoodShare: mx.GetLikelihoodShare(), LikelihoodRatio: mx.GetLikelihoodRatio()}
	}
	if ns := p.GetNearest(); len(ns) > 0 {
		out.Nearest = make([]Neighbour, len(ns))
		for i, n := range ns {
			out.Nearest[i] = Neighbour{Witness: n.GetWitness(), BestGroup: n.GetBestGroup(), Agree: int(n.GetAgree()),
				UnitsCompared: int(n.GetUnitsCompared()), Agreement: n.GetAgreement()}
		}
	}
	if p.BlockMixture != nil {
		block := p.GetBlockMixture()
		out.BlockMixture = &block
		out.Sections = make([]SectionPlacement, len(p.GetSections()))
		for i, s := range p.GetSections() {
			out.Sections[i] = SectionPlacement{Section: s.GetSection(), BestGroup: s.GetBestGroup(), Confidence: s.GetConfidence(),
				CoveredUnits: int(s.GetCoveredUnits())}
		}
		out.Changes = make([]BlockChange, len(p.GetBlockChanges()))
		for i, c := range p.GetBlockChanges() {
			out.Changes[i] = BlockChange{AfterSection: c.GetAfterSection(), AtSection: c.GetAtSection(), FromGroup: c.GetFromGroup(), ToGroup: c.GetToGroup()}
		}
	}
	return out
}

func readingsProto(rs []Reading) []*pb.WitnessReading {
	out := make([]*pb.WitnessReading, len(rs))
	backing := make([]pb.WitnessReading, len(rs))
	for i, r := range rs {
		backing[i].Unit, backing[i].Reading = r.Unit, r.Reading
		out[i] = &backing[i]
	}
	return out
}

// placeInput returns a placement request as a wire.Input, which the codec encodes as the
// protobuf request message it stands for: a witness is sent without a protobuf message per
// reading. Each request gets its own Input (a stats handler given by WithDialOptions may keep
// the messages it sees).
func placeInput(ref, witness string, readings []Reading, opt PlaceOptions) *wire.Input {
	in := &wire.Input{Model: ref, Witness: witness, Nearest: int32(min(opt.Nearest, math.MaxInt32)), BySection: opt.BySection,
		Readings: make([]model.Reading, len(readings))}
	for i, r := range readings {
		in.Readings[i] = model.Reading{Unit: r.Unit, Reading: r.Reading}
	}
	return in
}

// Place places one partial witness against the model a reference names.
func (c *Client) Place(ctx context.Context, model, witness string, readings []Reading) (*Placement, error) {
	return c.PlaceWith(ctx, model, witness, readings, PlaceOptions{})
}

// PlaceWith is Place with the optional parts chosen by opt.
func (c *Client) PlaceWith(ctx context.Context, model, witness string, readings []Reading, opt PlaceOptions) (*Placement, error) {
	resp := new(pb.PlaceResponse)
	err := c.conn.Invoke(ctx, pb.PlacementService_Place_FullMethodName, placeInput(model, witness, readings, opt), resp)
	if err != nil {
		return nil, c.wrap("place "+witness, err)
	}
	return placementFrom(resp.GetPlacement()), nil
}

// StreamResult is the answer for one witness of PlaceAll: a placement or its own error.
type StreamResult struct {
	// Index is the witness's position in the input.
	Index     int
	Witness   string
	Placement *Placement
	// Err says why this witness was not placed (Code, Message, Violations); the stream goes on.
	Err *Error
}

// PlaceAll places many witnesses over one stream, all against the model reference (resolved
// once by the server, so all get the same version). fn is called for each answer, in input
// order; an error from fn ends the stream. Witnesses are sent while answers are read.
func (c *Client) PlaceAll(ctx context.Context, model string, witnesses []Witness, fn func(StreamResult) error) error {
	return c.PlaceAllWith(ctx, model, witnesses, PlaceOptions{}, fn)
}

// PlaceAllWith is PlaceAll with the optional parts of every placement chosen by opt.
func (c *Client) PlaceAllWith(ctx context.Context, model string, witnesses []Witness, opt PlaceOptions, fn func(StreamResult) error) error {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	stream, err := c.places.PlaceStream(ctx)
	if err != nil {
		return c.wrap("place stream", err)
	}
	sendErr := make(chan error, 1)
	go func() {
		for i, w := range witnesses {
			ref := ""
			if i == 0 {
				ref = model
			}
			if err := stream.SendMsg(placeInput(ref, w.Siglum, w.Readings, opt)); err != nil {
				// The receiving side sees the stream's real error.
				sendErr <- nil
				return
			}
		}
		sendErr <- stream.CloseSend()
	}()
	for n := 0; ; n++ {
		resp, err := stream.Recv()
		if err == io.EOF {
			if n != len(witnesses) {
				return fmt.Errorf("place stream: strayleafd at %s answered %d of %d witnesses", c.addr, n, len(witnesses))
			}
			return c.wrap("place stream", <-sendErr)
		}
		if err != nil {
			return c.wrap("place stream", err)
		}
		r := StreamResult{Index: int(resp.GetIndex()), Witness: resp.GetWitness()}
		if p := resp.GetPlacement(); p != nil {
			r.Placement = placementFrom(p)
		} else {
			e := resp.GetError()
			r.Err = &Error{Op: "place " + resp.GetWitness(), Addr: c.addr, Code: codes.Code(e.GetCode()), Message: e.GetMessage()}
			for _, v := range e.GetFieldViolations() {
				r.Err.Violations = append(r.Err.Violations, FieldViolation{Field: v.GetField(), Description: v.GetDescription()})
			}
		}
		if err := fn(r); err != nil {
			return err
		}
	}
}

// SuggestOptions are the settings of Suggest.
type SuggestOptions struct {
	// Top is the number of units to name (0: the server's default, 10).
	Top int
	// Candidates, if not nil, are the unit ids that can still be checked; no other unit is
	// suggested.
	Candidates []string
}

// Suggestions is the answer of Suggest, with the field names of `strayleaf suggest --json`.
type Suggestions struct {
	Witness string `json:"witness"`
	Model   string `json:"model"`
	// Probe is true when nothing was checked yet and Units is the model's probe list.
	Probe bool `json:"probe"`
	// Posterior is the distribution over the groups given the readings so far, most probable
	// first; EntropyBits its entropy.
	Posterior   []GroupShare `json:"posterior"`
	EntropyBits float64      `json:"entropy_bits"`
	Units       []Suggestion `json:"units"`
}

// Suggestion is a unit worth checking next: Gain is the expected reduction of the uncertainty
// about the group, in bits; Hints maps each likely reading to the group it would favour, and
// Readings gives their predicted probabilities, most probable first.
type Suggestion struct {
	Unit     string            `json:"unit"`
	Gain     float64           `json:"gain"`
	Hints    map[string]string `json:"hints"`
	Readings []ReadingHint     `json:"readings"`
}

// ReadingHint is a likely reading of a suggested unit.
type ReadingHint struct {
	Reading     string  `json:"reading"`
	Probability float64 `json:"probability"`
	Favours     string  `json:"favours"`
}

// Suggest names at most top units worth checking next for a partial witness (top 0: the
// server's default, 10), and the model version used. SuggestUnits gives the whole answer.
func (c *Client) Suggest(ctx context.Context, model, witness string, readings []Reading, top int) (string, []Suggestion, error) {
	s, err := c.SuggestUnits(ctx, model, witness, readings, SuggestOptions{Top: top})
	if err != nil {
		return "", nil, err
	}
	return s.Model, s.Units, nil
}

// SuggestUnits asks which units are worth checking next for a partial witness, given the
// readings checked so far (none: the model's probe list), with the posterior over the groups.
func (c *Client) SuggestUnits(ctx context.Context, model, witness string, readings []Reading, opt SuggestOptions) (*Suggestions, error) {
	resp, err := c.places.Suggest(ctx, &pb.SuggestRequest{Model: model, Witness: witness, Readings: readingsProto(readings),
		MaxUnits: int32(opt.Top), Candidates: opt.Candidates})
	if err != nil {
		return nil, c.wrap("suggest "+witness, err)
	}
	out := &Suggestions{Witness: resp.GetWitness(), Model: resp.GetModel(), Probe: resp.GetProbe(), EntropyBits: resp.GetEntropyBits(),
		Posterior: make([]GroupShare, 0, len(resp.GetPosterior())), Units: make([]Suggestion, 0, len(resp.GetUnits()))}
	for _, g := range resp.GetPosterior() {
		out.Posterior = append(out.Posterior, GroupShare{Group: g.GetGroup(), Share: g.GetShare()})
	}
	for _, u := range resp.GetUnits() {
		s := Suggestion{Unit: u.GetUnit(), Gain: u.GetGain(), Hints: map[string]string{}, Readings: make([]ReadingHint, 0, len(u.GetReadings()))}
		for k, v := range u.GetHints() {
			s.Hints[k] = v
		}
		for _, h := range u.GetReadings() {
			s.Readings = append(s.Readings, ReadingHint{Reading: h.GetReading(), Probability: h.GetProbability(), Favours: h.GetFavours()})
		}
		out.Units = append(out.Units, s)
	}
	return out, nil
}

// ModelSummary is one model name in the store.
type ModelSummary struct {
	Name          string         `json:"name"`
	Versions      []int          `json:"versions"`
	LatestVersion int            `json:"latest_version"`
	Aliases       map[string]int `json:"aliases"`
	// VersionDetails are the versions' records, ascending; AliasDetails who set each alias when.
	VersionDetails []VersionInfo `json:"version_details"`
	AliasDetails   []AliasInfo   `json:"alias_details"`
}

// VersionInfo is the store's record of one published version.
type VersionInfo struct {
	Version     int       `json:"version"`
	PublishTime time.Time `json:"publish_time"`
	PublishedBy string    `json:"published_by"`
	Note        string    `json:"note"`
	// BundleSHA256 is the hex SHA-256 of the bundle bytes.
	BundleSHA256 string         `json:"bundle_sha256"`
	BundleBytes  int            `json:"bundle_bytes"`
	Summary      VersionSummary `json:"summary"`
}

// VersionSummary is the training summary recorded with a version.
type VersionSummary struct {
	FormatVersion        int     `json:"format_version"`
	GroupCount           int     `json:"group_count"`
	UnitCount            int     `json:"unit_count"`
	ProfileReadingCount  int     `json:"profile_reading_count"`
	TrainingWitnessCount int     `json:"training_witness_count"`
	Objective            float64 `json:"objective"`
	RelativeError        float64 `json:"relative_error"`
	CollationSHA256      string  `json:"collation_sha256"`
	Calibrated           bool    `json:"calibrated"`
}

// AliasInfo says where an alias points, and who set it when.
type AliasInfo struct {
	Alias   string    `json:"alias"`
	Version int       `json:"version"`
	SetBy   string    `json:"set_by"`
	SetTime time.Time `json:"set_time"`
}

// VersionInfoFrom converts the wire form of a version record.
func VersionInfoFrom(v *pb.ModelVersionInfo) VersionInfo {
	sm := v.GetSummary()
	return VersionInfo{Version: int(v.GetVersion()), PublishTime: v.GetPublishTime().AsTime(), PublishedBy: v.GetPublishedBy(),
		Note: v.GetNote(), BundleSHA256: v.GetBundleSha256(), BundleBytes: int(v.GetBundleBytes()),
		Summary: VersionSummary{FormatVersion: int(sm.GetFormatVersion()), GroupCount: int(sm.GetGroupCount()), UnitCount: int(sm.GetUnitCount()),
			ProfileReadingCount: int(sm.GetProfileReadingCount()), TrainingWitnessCount: int(sm.GetTrainingWitnessCount()),
			Objective: sm.GetObjective(), RelativeError: sm.GetRelativeError(), CollationSHA256: sm.GetCollationSha256(), Calibrated: sm.GetCalibrated()}}
}

// ListModels lists the models of the server's store by name.
func (c *Client) ListModels(ctx context.Context) ([]ModelSummary, error) {
	resp, err := c.models.ListModels(ctx, &pb.ListModelsRequest{})
	if err != nil {
		return nil, c.wrap("list models", err)
	}
	out := make([]ModelSummary, 0, len(resp.GetModels()))
	for _, m := range resp.GetModels() {
		s := ModelSummary{Name: m.GetName(), LatestVersion: int(m.GetLatestVersion()), Aliases: map[string]int{}}
		for _, v := range m.GetVersions() {
			s.Versions = append(s.Versions, int(v))
		}
		for a, v := range m.GetAliases() {
			s.Aliases[a] = int(v)
		}
		for _, v := range m.GetVersionDetails() {
			s.VersionDetails = append(s.VersionDetails, VersionInfoFrom(v))
		}
		for _, a := range m.GetAliasDetails() {
			s.AliasDetails = append(s.AliasDetails, AliasInfo{Alias: a.GetAlias(), Version: int(a.GetVersion()), SetBy: a.GetSetBy(), SetTime: a.GetSetTime().AsTime()})
		}
		out = append(out, s)
	}
	return out, nil
}

// GetModel describes the version a reference resolves to: metadata, groups with their leading
// witnesses and profile readings, and units with their readings.
func (c *Client) GetModel(ctx context.Context, model string) (*pb.GetModelResponse, error) {
	resp, err := c.models.GetModel(ctx, &pb.GetModelRequest{Model: model})
	if err != nil {
		return nil, c.wrap("describe "+model, err)
	}
	return resp, nil
}

// PublishModel stores bundle as the next version of model name and, if alias is not empty,
// moves the alias to it in the same step. It needs a publish token.
func (c *Client) PublishModel(ctx context.Context, name string, bundle []byte, note, alias string) (Ref, error) {
	resp, err := c.models.PublishModel(ctx, &pb.PublishModelRequest{Name: name, Bundle: bundle, Note: note, Alias: alias})
	if err != nil {
		return Ref{}, c.wrap("publish "+name, err)
	}
	return ParseRef(resp.GetModel())
}

// SetAlias points name@alias at version. It needs a publish token.
func (c *Client) SetAlias(ctx context.Context, name, alias string, version int) (Ref, error) {
	resp, err := c.models.SetAlias(ctx, &pb.SetAliasRequest{Name: name, Alias: alias, Version: int32(version)})
	if err != nil {
		return Ref{}, c.wrap(fmt.Sprintf("set %s@%s", name, alias), err)
	}
	return ParseRef(resp.GetModel())
}

// RemoveAlias removes name@alias. It needs a publish token.
func (c *Client) RemoveAlias(ctx context.Context, name, alias string) error {
	_, err := c.models.RemoveAlias(ctx, &pb.RemoveAliasRequest{Name: name, Alias: alias})
	return c.wrap(fmt.Sprintf("remove %s@%s", name, alias), err)
}

// Event is one entry of the store's history.
type Event struct {
	Seq     uint64    `json:"seq"`
	Time    time.Time `json:"time"`
	Kind    string    `json:"kind"` // publish, import, alias, unalias or delete
	Name    string    `json:"name"`
	Version int       `json:"version"`
	Alias   string    `json:"alias,omitempty"`
	From    int       `json:"from,omitempty"`
	By      string    `json:"by"`
	Detail  string    `json:"detail"`
}

// History lists the store's history of model name ("" for all models), oldest first.
func (c *Client) History(ctx context.Context, name string) ([]Event, error) {
	resp, err := c.models.ListHistory(ctx, &pb.ListHistoryRequest{Name: name})
	if err != nil {
		return nil, c.wrap("history", err)
	}
	out := make([]Event, 0, len(resp.GetEvents()))
	for _, e := range resp.GetEvents() {
		out = append(out, Event{Seq: uint64(e.GetSeq()), Time: e.GetTime().AsTime(), Kind: e.GetKind(), Name: e.GetName(), Version: int(e.GetVersion()),
			Alias: e.GetAlias(), From: int(e.GetFromVersion()), By: e.GetBy(), Detail: e.GetDetail()})
	}
	return out, nil
}

// DeleteModelVersion removes name@version, which no alias may point at. It needs an admin
// token.
func (c *Client) DeleteModelVersion(ctx context.Context, name string, version int) error {
	_, err := c.models.DeleteModelVersion(ctx, &pb.DeleteModelVersionRequest{Name: name, Version: int32(version)})
	return c.wrap("delete "+VersionRef(name, version), err)
}

// ErrBundleChecksum is returned by ExportModel when the bytes received do not hash to the
// SHA-256 the server recorded.
var ErrBundleChecksum = errors.New("exported bundle does not match its recorded SHA-256")

// ExportModel returns the bundle of the version a reference resolves to, byte for byte as
// published, checked against its recorded SHA-256. It needs an admin token.
func (c *Client) ExportModel(ctx context.Context, model string) ([]byte, Ref, error) {
	resp, err := c.models.ExportModel(ctx, &pb.ExportModelRequest{Model: model})
	if err != nil {
		return nil, Ref{}, c.wrap("export "+model, err)
	}
	sum := sha256.Sum256(resp.GetBundle())
	if hex.EncodeToString(sum[:]) != resp.GetBundleSha256() {
		return nil, Ref{}, fmt.Errorf("export %s: %w", resp.GetModel(), ErrBundleChecksum)
	}
	r, err := ParseRef(resp.GetModel())
	return resp.GetBundle(), r, err
}

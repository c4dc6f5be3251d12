// Package simulate makes invented manuscript traditions with a known history, for demos and for
// tests that need ground truth.
//
// The model, a stemma of exemplars with copies made from them (common practice):
//
//   - The archetype has the base reading (pool reading 0) at every variation unit.
//   - Each family has a hyparchetype that departs from the archetype at a share FamilyDivergence
//     of the units; each group of the family has an exemplar that departs from the hyparchetype
//     at a share GroupDivergence. Groups of one family are thus close to each other (sub-groups),
//     and groups of different families further apart. A departure takes a pool reading other
//     than the parent's, uniformly. Where no family or group departs at a unit, the departures at
//     that unit are drawn again until one does. The exemplars then nearly always differ there,
//     though not always (every family may depart to the same reading; with one family, its
//     departure is shared by all its groups), and copyists' changes can blur a departure that
//     few copies carry, so a unit may still end up carrying no grouping signal.
//   - Each witness is a copy of its group's exemplar. At each unit the copyist changes the
//     reading with probability ScribalRate: with probability CoincidentShare to a reading that
//     the exemplar of another group has there (a coincidental agreement; if every other
//     exemplar has the copyist's reading, another pool reading), otherwise to a new reading of
//     his own (a singular reading).
//   - Mixed witnesses take each unit from a secondary group's exemplar with probability equal to
//     their mixture share, and from their own group's otherwise.
//   - Block-mixed witnesses copy their own group's exemplar up to a section boundary and another
//     group's from there on (a change of exemplar).
//   - Non-fragmentary witnesses lose a Poisson(LacunaRuns) number of runs of consecutive units
//     (lacunae), each of a length uniform in 1..LacunaMaxLen.
//   - Fragmentary witnesses are pure copies of which only a share between FragmentMin and
//     FragmentMax of the units survives: one contiguous stretch (a leaf), or, with probability
//     ScatteredShare, units scattered over the text.
//
// Everything is drawn from one PCG generator seeded with Config.Seed, in a fixed order and on
// one goroutine: the same Config gives the same tradition, byte for byte.
package simulate

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strconv"

	"strayleaf/placement/collation"
)

// Family is one branch of the stemma below the archetype.
type Family struct {
	// Groups is the number of groups (sub-groups sharing the family's hyparchetype), >= 1.
	Groups int
	// Share is the family's relative share of the witnesses (> 0); shares are normalised over
	// the families and split evenly over a family's groups.
	Share float64
}

// Config sets up a simulated tradition. Start from DefaultConfig and change what you need.
type Config struct {
	// Seed seeds the generator.
	Seed uint64
	// Witnesses is the number of witnesses.
	Witnesses int
	// Units is the number of variation units; Sections the number of sections they are split
	// into (contiguous, of near-equal size).
	Units, Sections int
	// SectionNames optionally names the sections (default "1", "2", ...); if given, it has
	// Sections distinct non-empty names.
	SectionNames []string
	// Readings is the number of pool readings per unit (>= 2), singular readings aside.
	Readings int
	// Families are the branches of the stemma.
	Families []Family
	// GroupNames optionally names the groups, in family order (default: a family letter and a
	// sub-group number, as a1, a2, b).
	GroupNames []string
	// FamilyDivergence and GroupDivergence are the shares of units at which a hyparchetype
	// departs from the archetype and a group exemplar from its hyparchetype.
	FamilyDivergence, GroupDivergence float64
	// ScribalRate is the per-unit probability of a copyist's change; CoincidentShare the share
	// of changes that fall on another group's reading rather than a singular one.
	ScribalRate, CoincidentShare float64
	// Mixed, BlockMixed and Fragmentary are the shares of witnesses of each kind (rounded to
	// whole witnesses). Every group keeps at least two pure witnesses.
	Mixed, BlockMixed, Fragmentary float64
	// MixtureMin and MixtureMax bound the secondary share of a mixed witness, drawn uniformly
	// among the multiples of 0.01 between them (at most 0.5, so that the primary group stays the
	// larger source).
	MixtureMin, MixtureMax float64
	// FragmentMin and FragmentMax bound the share of units a fragmentary witness keeps.
	FragmentMin, FragmentMax float64
	// ScatteredShare is the share of fragmentary witnesses whose surviving units are scattered
	// rather than contiguous.
	ScatteredShare float64
	// LacunaRuns is the mean number of lacunae per non-fragmentary witness; LacunaMaxLen the
	// longest lacuna, in units.
	LacunaRuns   float64
	LacunaMaxLen int
	// Sigla optionally names the witnesses in collation order (default W01, W02, ...); if given,
	// it has Witnesses distinct non-empty sigla.
	Sigla []string
	// Labels names units and readings (default PlainLabels).
	Labels Labeller
}

// DefaultConfig returns a small tradition: 60 witnesses, 200 units in 4 sections, 4 readings
// per unit, a dominant family of three sub-groups holding 60% of the witnesses and two further
// single-group families (25% and 15%), with a few mixed, block-mixed and fragmentary witnesses.
func DefaultConfig() Config {
	return Config{
		Seed:             1,
		Witnesses:        60,
		Units:            200,
		Sections:         4,
		Readings:         4,
		Families:         []Family{{Groups: 3, Share: 0.6}, {Groups: 1, Share: 0.25}, {Groups: 1, Share: 0.15}},
		FamilyDivergence: 0.2,
		GroupDivergence:  0.1,
		ScribalRate:      0.02,
		CoincidentShare:  0.25,
		Mixed:            0.05,
		BlockMixed:       0.05,
		Fragmentary:      0.08,
		MixtureMin:       0.2,
		MixtureMax:       0.5,
		FragmentMin:      0.05,
		FragmentMax:      0.25,
		ScatteredShare:   0.3,
		LacunaRuns:       0.5,
		LacunaMaxLen:     10,
	}
}

// NumGroups returns the number of groups over all families.
func (c Config) NumGroups() int {
	n := 0
	for _, f := range c.Families {
		n += f.Groups
	}
	return n
}

// Validate reports every setting out of range, joined in one error.
func (c Config) Validate() error {
	var errs []error
	bad := func(format string, a ...any) { errs = append(errs, fmt.Errorf(format, a...)) }
	share := func(name string, v float64) {
		if !(v >= 0 && v <= 1) {
			bad("%s is %g; expected a share between 0 and 1", name, v)
		}
	}
	if c.Units < 2 {
		bad("units is %d; expected at least 2", c.Units)
	}
	if c.Sections < 1 || c.Sections > c.Units {
		bad("sections is %d; expected between 1 and the number of units (%d)", c.Sections, c.Units)
	}
	if c.SectionNames != nil {
		if len(c.SectionNames) != c.Sections {
			bad("section_names has %d names for %d sections", len(c.SectionNames), c.Sections)
		} else if err := distinct("section_names", c.SectionNames); err != nil {
			errs = append(errs, err)
		}
	}
	if c.Readings < 2 {
		bad("readings is %d; expected at least 2 readings per unit", c.Readings)
	}
	if len(c.Families) == 0 {
		bad("families is empty; expected at least one family")
	}
	for i, f := range c.Families {
		if f.Groups < 1 {
			bad("family %d has %d groups; expected at least 1", i, f.Groups)
		}
		if !(f.Share > 0) || math.IsInf(f.Share, 0) {
			bad("family %d has share %g; expected a positive share", i, f.Share)
		}
	}
	groups := c.NumGroups()
	if c.GroupNames != nil {
		if len(c.GroupNames) != groups {
			bad("group_names has %d names for %d groups", len(c.GroupNames), groups)
		} else if err := distinct("group_names", c.GroupNames); err != nil {
			errs = append(errs, err)
		}
	}
	share("family_divergence", c.FamilyDivergence)
	share("group_divergence", c.GroupDivergence)
	// A unit is drawn again until some exemplar departs at it (see the package doc): the chance
	// that none does must leave room for that.
	if none := math.Pow(1-c.FamilyDivergence, float64(len(c.Families))) * math.Pow(1-c.GroupDivergence, float64(groups)); none > 0.999 {
		bad("family_divergence %g and group_divergence %g are too small: at %.2f%% of draws no exemplar would differ from the archetype", c.FamilyDivergence, c.GroupDivergence, 100*(1-none))
	}
	share("scribal_rate", c.ScribalRate)
	share("coincident_share", c.CoincidentShare)
	share("mixed", c.Mixed)
	share("block_mixed", c.BlockMixed)
	share("fragmentary", c.Fragmentary)
	share("scattered_share", c.ScatteredShare)
	if lo, hi := hundredths(c.MixtureMin, c.MixtureMax); !(c.MixtureMin > 0 && c.MixtureMax <= 0.5 && lo <= hi) {
		bad("mixture range is [%g, %g]; expected 0 < min <= max <= 0.5 with a multiple of 0.01 between them", c.MixtureMin, c.MixtureMax)
	}
	if !(c.FragmentMin > 0 && c.FragmentMin <= c.FragmentMax && c.FragmentMax < 1) {
		bad("fragment range is [%g, %g]; expected 0 < min <= max < 1", c.FragmentMin, c.FragmentMax)
	}
	if !(c.LacunaRuns >= 0 && c.LacunaRuns <= 50) {
		bad("lacuna_runs is %g; expected a mean number of lacunae between 0 and 50", c.LacunaRuns)
	}
	if c.LacunaMaxLen < 1 || (c.Units >= 2 && c.LacunaMaxLen > c.Units) {
		bad("lacuna_max_len is %d; expected between 1 and the number of units (%d)", c.LacunaMaxLen, c.Units)
	}
	if c.Witnesses < 2 {
		bad("witnesses is %d; expected at least 2", c.Witnesses)
	}
	if c.Sigla != nil {
		if len(c.Sigla) != c.Witnesses {
			bad("sigla has %d sigla for %d witnesses", len(c.Sigla), c.Witnesses)
		} else if err := distinct("sigla", c.Sigla); err != nil {
			errs = append(errs, err)
		}
	}
	if kindCount(c.BlockMixed, c.Witnesses) > 0 && c.Sections < 2 {
		bad("block_mixed is %g but there is %d section; a change of exemplar needs at least 2 sections", c.BlockMixed, c.Sections)
	}
	if kindCount(c.Mixed, c.Witnesses)+kindCount(c.BlockMixed, c.Witnesses) > 0 && groups < 2 {
		bad("mixed and block-mixed witnesses need at least 2 groups; there is %d", groups)
	}
	if len(errs) == 0 { // the split over groups needs valid families and counts
		sizes := groupSizes(&c)
		room := 0
		for g, n := range sizes {
			if n < 2 {
				bad("group %d gets %d witnesses of %d; expected at least 2 (more witnesses or a larger share)", g, n, c.Witnesses)
			}
			room += n - 2
		}
		special := kindCount(c.Mixed, c.Witnesses) + kindCount(c.BlockMixed, c.Witnesses) + kindCount(c.Fragmentary, c.Witnesses)
		if special > room {
			bad("%d mixed, block-mixed and fragmentary witnesses asked for, but only %d can be spared with two pure witnesses kept in each group", special, room)
		}
	}
	if len(errs) > 0 {
		return fmt.Errorf("simulation config: %w", errors.Join(errs...))
	}
	return nil
}

func distinct(what string, names []string) error {
	seen := make(map[string]bool, len(names))
	for i, n := range names {
		if n == "" {
			return fmt.Errorf("%s: name %d is empty", what, i)
		}
		if seen[n] {
			return fmt.Errorf("%s: %q is given twice", what, n)
		}
		seen[n] = true
	}
	return nil
}

// hundredths returns the multiples of 0.01 in [lo, hi], in hundredths.
func hundredths(lo, hi float64) (int, int) {
	return int(math.Ceil(100*lo - 1e-9)), int(math.Floor(100*hi + 1e-9))
}

// kindCount is the whole number of witnesses for a share.
func kindCount(share float64, witnesses int) int { return int(math.Round(share * float64(witnesses))) }

// groupSizes splits the witnesses over the groups by largest remainder (Hamilton's method) on
// the weights share/groups-in-family, ties to the earlier group.
func groupSizes(c *Config) []int {
	total := 0.0
	for _, f := range c.Families {
		total += f.Share
	}
	var quota []float64
	for _, f := range c.Families {
		for range f.Groups {
			quota = append(quota, float64(c.Witnesses)*f.Share/total/float64(f.Groups))
		}
	}
	sizes := make([]int, len(quota))
	left := c.Witnesses
	for g, q := range quota {
		sizes[g] = int(math.Floor(q))
		left -= sizes[g]
	}
	for ; left > 0; left-- {
		best := 0
		for g := range quota {
			if quota[g]-float64(sizes[g]) > quota[best]-float64(sizes[best]) {
				best = g
			}
		}
		sizes[best]++
		quota[best] = float64(sizes[best]) // its remainder is spent
	}
	return sizes
}

// Tradition is a simulated tradition: the collation and what really happened.
type Tradition struct {
	Collation *collation.Collation
	Truth     Truth
	// Sources[w][u] is the group whose exemplar witness w copied at unit u (before the copyist's
	// own changes, and whether or not the witness is extant there).
	Sources [][]int
}

// plan is one witness before its row is drawn.
type plan struct {
	group, second int // second: the other source of a mixed or block-mixed witness, else -1
	kind          Kind
	share         float64 // mixture share of the second group
	switchSection int     // block-mixed: first section taken from the second group
	extent        int     // fragmentary: units kept
	scattered     bool
}

// Simulate draws a tradition from the config.
func Simulate(cfg Config) (*Tradition, error) {
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	rng := newRand(cfg.Seed)
	nu, ng, pool := cfg.Units, cfg.NumGroups(), cfg.Readings

	sectionNames := cfg.SectionNames
	if sectionNames == nil {
		sectionNames = make([]string, cfg.Sections)
		for i := range sectionNames {
			sectionNames[i] = strconv.Itoa(i + 1)
		}
	}
	sectionOf := make([]int, nu)
	for u := range sectionOf {
		sectionOf[u] = u * cfg.Sections / nu
	}
	groupFamily := make([]int, 0, ng)
	for f, fam := range cfg.Families {
		for range fam.Groups {
			groupFamily = append(groupFamily, f)
		}
	}
	groupNames := cfg.GroupNames
	if groupNames == nil {
		groupNames = defaultGroupNames(cfg.Families)
	}

	// The stemma: hyparchetypes and group exemplars, unit by unit.
	exemplar := make([][]int32, ng)
	for g := range exemplar {
		exemplar[g] = make([]int32, nu)
	}
	famDep := make([]bool, len(cfg.Families))
	grpDep := make([]bool, ng)
	hyp := make([]int, len(cfg.Families))
	for u := 0; u < nu; u++ {
		for {
			departed := false
			for f := range famDep {
				famDep[f] = chance(rng, cfg.FamilyDivergence)
				departed = departed || famDep[f]
			}
			for g := range grpDep {
				grpDep[g] = chance(rng, cfg.GroupDivergence)
				departed = departed || grpDep[g]
			}
			if departed {
				break
			}
		}
		for f := range hyp {
			hyp[f] = 0
			if famDep[f] {
				hyp[f] = otherThan(rng, pool, 0)
			}
		}
		for g := range exemplar {
			r := hyp[groupFamily[g]]
			if grpDep[g] {
				r = otherThan(rng, pool, r)
			}
			exemplar[g][u] = int32(r)
		}
	}

	// Witness plans: group membership, then kinds, then the order of the collation.
	sizes := groupSizes(&cfg)
	plans := make([]plan, 0, cfg.Witnesses)
	pure := make([]int, ng)
	for g, n := range sizes {
		for range n {
			plans = append(plans, plan{group: g, second: -1, kind: KindPure})
		}
		pure[g] = n
	}
	assign := func(k Kind, count int) {
		for range count {
			var eligible []int
			for i := range plans {
				if plans[i].kind == KindPure && pure[plans[i].group] > 2 {
					eligible = append(eligible, i)
				}
			}
			i := eligible[intN(rng, len(eligible))]
			plans[i].kind = k
			pure[plans[i].group]--
		}
	}
	assign(KindMixed, kindCount(cfg.Mixed, cfg.Witnesses))
	assign(KindBlockMixed, kindCount(cfg.BlockMixed, cfg.Witnesses))
	assign(KindFragmentary, kindCount(cfg.Fragmentary, cfg.Witnesses))
	shuffle(rng, plans)
	loFrag := max(1, int(math.Round(cfg.FragmentMin*float64(nu))))
	hiFrag := max(loFrag, int(math.Round(cfg.FragmentMax*float64(nu))))
	for i := range plans {
		p := &plans[i]
		switch p.kind {
		case KindMixed:
			p.second = otherThan(rng, ng, p.group)
			lo, hi := hundredths(cfg.MixtureMin, cfg.MixtureMax)
			p.share = float64(lo+intN(rng, hi-lo+1)) / 100
		case KindBlockMixed:
			p.second = otherThan(rng, ng, p.group)
			p.switchSection = 1 + intN(rng, cfg.Sections-1)
		case KindFragmentary:
			p.extent = loFrag + intN(rng, hiFrag-loFrag+1)
			p.scattered = chance(rng, cfg.ScatteredShare)
		}
	}

	// The copies.
	rows := make([][]int32, len(plans))
	sources := make([][]int, len(plans))
	singulars := make([]int, nu) // singular readings made so far at each unit
	truth := Truth{Seed: cfg.Seed, Units: nu, Sections: sectionNames}
	candidates := make([]int32, 0, ng)
	for i, p := range plans {
		row := make([]int32, nu)
		source := make([]int, nu)
		for u := range row {
			g := p.group
			switch p.kind {
			case KindMixed:
				if chance(rng, p.share) {
					g = p.second
				}
			case KindBlockMixed:
				if sectionOf[u] >= p.switchSection {
					g = p.second
				}
			}
			source[u] = g
			row[u] = exemplar[g][u]
		}
		for u := range row {
			if !chance(rng, cfg.ScribalRate) {
				continue
			}
			if chance(rng, cfg.CoincidentShare) {
				candidates = candidates[:0]
				for g := range exemplar {
					r := exemplar[g][u]
					if g != source[u] && r != row[u] && !contains(candidates, r) {
						candidates = append(candidates, r)
					}
				}
				if len(candidates) > 0 {
					row[u] = candidates[intN(rng, len(candidates))]
				} else {
					row[u] = int32(otherThan(rng, pool, int(row[u])))
				}
				continue
			}
			row[u] = int32(pool + singulars[u])
			singulars[u]++
		}
		wt := WitnessTruth{Group: p.group, Kind: p.kind, Shares: make([]float64, ng), Drawn: make([]int, ng)}
		switch p.kind {
		case KindFragmentary:
			if p.scattered {
				row = CutScattered(row, p.extent, rng)
				wt.Fragment = &Fragment{Form: FormScattered}
			} else {
				row = CutContiguous(row, p.extent, rng)
				wt.Fragment = &Fragment{Form: FormLeaf, Runs: ExtantRuns(row)}
			}
		default:
			wt.Lacunae = drawLacunae(rng, row, poisson(rng, cfg.LacunaRuns), cfg.LacunaMaxLen)
		}
		for u, r := range row {
			if r != collation.Lacuna {
				wt.Drawn[source[u]]++
				wt.Extant++
			}
		}
		switch p.kind {
		case KindMixed:
			wt.Shares[p.group] = float64(100-int(math.Round(100*p.share))) / 100
			wt.Shares[p.second] = p.share
		case KindBlockMixed:
			at := firstUnitOf(sectionOf, p.switchSection)
			wt.Shares[p.group] = float64(at) / float64(nu)
			wt.Shares[p.second] = float64(nu-at) / float64(nu)
			wt.Switch = &Switch{Section: sectionNames[p.switchSection], SectionIndex: p.switchSection, Unit: at, From: p.group, To: p.second}
			if 2*at < nu {
				wt.Group = p.second
			}
		default:
			wt.Shares[p.group] = 1
		}
		rows[i], sources[i] = row, source
		truth.Witnesses = append(truth.Witnesses, wt)
	}

	// Names and the collation.
	sigla := cfg.Sigla
	if sigla == nil {
		sigla = make([]string, len(plans))
		width := len(strconv.Itoa(len(plans)))
		for i := range sigla {
			sigla[i] = fmt.Sprintf("W%0*d", max(2, width), i+1)
		}
	}
	labels := cfg.Labels
	if labels == nil {
		labels = PlainLabels{Width: max(3, len(strconv.Itoa(nu))), Pool: pool}
	}
	var b collation.Builder
	unitIDs := make([]string, nu)
	readingLabels := make([][]string, nu)
	seenUnit := make(map[string]bool, nu)
	pos := 0
	for u := range nu {
		if u > 0 && sectionOf[u] != sectionOf[u-1] {
			pos = 0
		}
		id := labels.Unit(u, sectionOf[u], pos)
		pos++
		if id == "" || seenUnit[id] {
			return nil, fmt.Errorf("labelling unit %d: name %q is empty or given twice", u, id)
		}
		seenUnit[id] = true
		unitIDs[u] = id
		if _, err := b.AddUnit(id, sectionNames[sectionOf[u]]); err != nil {
			return nil, fmt.Errorf("building collation: %w", err)
		}
		n := pool + singulars[u]
		readingLabels[u] = make([]string, n)
		seen := make(map[string]bool, n)
		for r := range n {
			l := labels.Reading(u, r)
			if l == "" || seen[l] {
				return nil, fmt.Errorf("labelling unit %s: reading %d is named %q, which is empty or given twice", id, r, l)
			}
			seen[l] = true
			readingLabels[u][r] = l
		}
	}
	for i, row := range rows {
		b.AddWitness(sigla[i])
		truth.Witnesses[i].Siglum = sigla[i]
		for u, r := range row {
			if r == collation.Lacuna {
				continue
			}
			if err := b.Add(sigla[i], unitIDs[u], readingLabels[u][r], sectionNames[sectionOf[u]]); err != nil {
				return nil, fmt.Errorf("building collation: %w", err)
			}
		}
	}
	truth.Groups = make([]GroupTruth, ng)
	for g := range truth.Groups {
		truth.Groups[g] = GroupTruth{Name: groupNames[g], Family: groupFamily[g]}
	}
	truth.countMembers()
	return &Tradition{Collation: b.Build(), Truth: truth, Sources: sources}, nil
}

// defaultGroupNames names groups by family letter, with a sub-group number in families of more
// than one group: a1, a2, a3, b, c.
func defaultGroupNames(fams []Family) []string {
	var names []string
	for f, fam := range fams {
		letter := familyLetter(f)
		if fam.Groups == 1 {
			names = append(names, letter)
			continue
		}
		for i := range fam.Groups {
			names = append(names, letter+strconv.Itoa(i+1))
		}
	}
	return names
}

func familyLetter(f int) string {
	if f < 26 {
		return string(rune('a' + f))
	}
	return "f" + strconv.Itoa(f+1) + "-"
}

func contains(s []int32, x int32) bool {
	for _, v := range s {
		if v == x {
			return true
		}
	}
	return false
}

// firstUnitOf returns the first unit whose section is at least s.
func firstUnitOf(sectionOf []int, s int) int {
	for u, sec := range sectionOf {
		if sec >= s {
			return u
		}
	}
	return len(sectionOf)
}

// drawLacunae blanks n runs of 1..maxLen consecutive units of row (runs may meet or overlap)
// and returns the resulting lacunae, merged, in text order.
func drawLacunae(rng *rand.Rand, row []int32, n, maxLen int) []Run {
	var runs []Run
	for range n {
		length := 1 + intN(rng, maxLen)
		start := intN(rng, len(row)-length+1)
		runs = append(runs, Run{Start: start, End: start + length})
	}
	runs = mergeRuns(runs)
	for _, r := range runs {
		for u := r.Start; u < r.End; u++ {
			row[u] = collation.Lacuna
		}
	}
	return runs
}

// mergeRuns sorts runs and joins those that overlap or touch.
func mergeRuns(runs []Run) []Run {
	if len(runs) == 0 {
		return nil
	}
	slices.SortFunc(runs, func(a, b Run) int { return cmp.Compare(a.Start, b.Start) })
	out := []Run{runs[0]}
	for _, r := range runs[1:] {
		last := &out[len(out)-1]
		if r.Start <= last.End {
			last.End = max(last.End, r.End)
			continue
		}
		out = append(out, r)
	}
	return out
}

package ingest

import (
	"context"
	"errors"
	"fmt"
	"io"
	"maps"
	"math"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strconv"
	"strings"
	"time"

	"trajvault/internal/elements"
	"trajvault/internal/epoch"
	"trajvault/internal/finding"
	"trajvault/internal/h5"
	"trajvault/internal/quantity"
	"trajvault/internal/textnum"
	"trajvault/internal/trajfile"
	"trajvault/internal/units"
	"trajvault/provenance"

	"golang.org/x/sync/errgroup"
)

// ConvertOptions add to Options what only convert needs.
type ConvertOptions struct {
	Options
	Author, Email string
	ToolVersion   string
	// Tolerance allows lossy storage per quantity (element name ->
	// absolute bound in the element's unit); the bound is recorded.
	Tolerance map[string]float64
	// SeriesFrames sets the time-series chunking of per-atom elements
	// (trajfile.Spec.SeriesFrames); 0 = DefaultSeriesFrames, -1 = chunks
	// of whole frames.
	SeriesFrames int
	// File sets the HDF5 file format (default DefaultFile).
	File *h5.CreateOptions
	// ExplicitClock stores step and time as one entry per frame even when
	// the sampling is uniform (default: H5MD fixed mode then).
	ExplicitClock bool
	// CommandLine is recorded in the provenance.
	CommandLine []string
	// BitExact stores every value as the float64 nearest to the printed
	// decimal (lossless filters only). By default numbers are stored with
	// the scale-offset filter at their printed decimals: digit-exact when
	// printed at that precision, but a reader may see the last bit differ
	// (HDF5 decodes k/10^D + min in floating point).
	BitExact bool
	// ForReaders converts time, positions, velocities, forces, energies
	// and masses into units that common H5MD readers with a fixed unit
	// list understand (trajfile.ReaderUnits) and stores an explicit
	// clock. The stored numbers are then float64 conversions, not the
	// printed digits; the provenance records both units.
	ForReaders bool
}

// Result says what convert wrote and dropped.
type Result struct {
	Output  string            `json:"output"`
	Frames  int               `json:"frames"`
	Hops    int               `json:"hops"`
	Dropped []string          `json:"dropped"`
	Storage map[string]string `json:"storage"`
	// NotStored is what the sources hold that is not stored, with the
	// file and the reason (TrajReport.NotStored).
	NotStored []string `json:"not_stored"`
	// Accepted are the physics cross-check findings accepted with
	// AcceptMismatch.
	Accepted []string `json:"accepted_mismatches,omitempty"`
	// Overrides are the file units replaced by given ones
	// (Options.UnitsOverFile).
	Overrides []string `json:"unit_overrides,omitempty"`
}

// DefaultSeriesFrames is the time-series chunk length, chosen by
// measurement (bench/results.md, chunk-length sweep): within 0.5 % of the
// smallest output (512 frames) and 10 % faster; longer chunks grow the
// range an atom covers, shorter ones the per-chunk overhead.
const DefaultSeriesFrames = 1024

func seriesFrames(n int) int {
	switch {
	case n < 0:
		return 0
	case n == 0:
		return DefaultSeriesFrames
	}
	return n
}

// DefaultFile is the file format of converted trajectories, chosen by
// measurement (bench/results.md): the HDF5 1.10 format stores groups
// compactly and indexes chunks with extensible arrays, about 2 % smaller
// than the earliest format; HDF5 1.10 (2016) and later read it. convert
// --hdf5-compat 1.8 or earliest writes older formats.
var DefaultFile = h5.CreateOptions{Format: h5.Format110}

// maxExactScaled bounds |x| 10^D for exact scale-offset storage: well
// inside float64's 2^53 integers, so x 10^D rounds to the printed integer.
const maxExactScaled = 1 << 50

// Convert writes one trajectory, scanned by Scan, to out in the
// layout. When ctx is cancelled it stops promptly and returns ctx.Err();
// as on any error, nothing is left under out.
func Convert(ctx context.Context, rep *TrajReport, out string, opt ConvertOptions) (*Result, error) {
	defer rep.Discard() // the spool serves one conversion, done or failed
	if p := rep.Refusal(opt.DropPartial); p != nil {
		return nil, fmt.Errorf("%s: %s %s (%s); fix the logs or the recipe, then convert again", rep.Name, p.Code, p.Message, where(*p))
	}
	if fr := rep.frameFile(); fr == nil || fr.Kept == 0 {
		return nil, fmt.Errorf("%s: no frames (no geometry frames and no records)", rep.Name)
	}
	res := &Result{Output: out, Storage: map[string]string{}, NotStored: append([]string{}, rep.NotStored...), Overrides: rep.Overrides}
	for _, p := range rep.Problems {
		if p.Code == PKinetic && p.Severity != finding.Error {
			res.Accepted = append(res.Accepted, p.String())
		}
	}
	for _, f := range rep.Files {
		for _, d := range mergeRanges(f.dropped) {
			res.Dropped = append(res.Dropped, fmt.Sprintf("%s: records %d..%d replaced by a later restart", f.File, d[0]+1, d[1]))
		}
		if f.partial >= 0 {
			res.Dropped = append(res.Dropped, fmt.Sprintf("%s: cut last record %d (--drop-partial)", f.File, f.partial+1))
		}
	}
	spec, err := specFor(rep, opt, res)
	if err != nil {
		return nil, err
	}
	srcs, err := convertSources(rep, opt.Options)
	if err != nil {
		return nil, err
	}
	defer func() {
		for _, s := range srcs {
			s.close()
		}
	}()
	started := epoch.Now() // SOURCE_DATE_EPOCH when set: reproducible files
	hctx, stopHashing := context.WithCancel(ctx)
	defer stopHashing()
	hashes := hashSources(hctx, rep, opt)
	w, err := trajfile.Create(out, spec)
	if err != nil {
		return nil, err
	}
	if err := stream(ctx, rep, srcs, w, opt); err != nil {
		w.Abort()
		return nil, err
	}
	for i, s := range srcs {
		if rep.Files[i].reader.Events {
			// Events may follow the last frame: read the file to the end
			// to collect them.
			for {
				if err := ctx.Err(); err != nil {
					w.Abort()
					return nil, err
				}
				if _, err := s.next(); err != nil {
					if err != io.EOF {
						w.Abort()
						return nil, err
					}
					break
				}
			}
		}
		for _, h := range s.hops() {
			base := rep.stateBase(opt.Options)
			if !h.hasStep {
				w.Abort()
				return nil, fmt.Errorf("%s:%d: hop without a step (no step group and no step line before it)", s.file(), h.line)
			}
			// The hop's time on the run's clock: logs give hops by step.
			t := rep.TimeFirst + float64(h.step-rep.FirstStep)*rep.TimeStep
			if err := w.WriteHop(trajfile.Hop{Step: h.step, Time: t, From: h.from - base, To: h.to - base, Frustrated: h.frustrated}); err != nil {
				w.Abort()
				return nil, fmt.Errorf("%s:%d: %v", s.file(), h.line, err)
			}
			res.Hops++
		}
	}
	res.Frames = w.Frames()
	h := <-hashes
	if h.err != nil {
		w.Abort()
		return nil, fmt.Errorf("hashing sources: %w", h.err)
	}
	rec := provenance.Record{
		Tool: "trajvault", ToolVersion: opt.ToolVersion, CommandLine: opt.CommandLine,
		Started: started.Format(time.RFC3339), Finished: epoch.Now().Format(time.RFC3339),
		Sources: h.sources, Units: storedUnits(rep.Units, opt), ConstantSet: provenance.ConstantSet,
		Storage: res.Storage, Dropped: res.Dropped, NotStored: res.NotStored, Accepted: res.Accepted,
	}
	if opt.Recipe != nil {
		rec.Recipe = opt.Recipe.Text
	}
	rec.Conversions = append(rec.Conversions, rep.Overrides...)
	if opt.ForReaders {
		rec.Conversions = append(rec.Conversions, readerConversion(rep.Units))
	}
	if rep.momentaStored() {
		pu := rep.Units[string(quantity.Momentum)]
		if pu == "" {
			pu = "(not given: the velocity unit was given for momentum/mass)"
		}
		rec.Conversions = append(rec.Conversions, fmt.Sprintf("velocity = momentum / mass: momentum in %s, masses in u (%s), velocity in %s; %s",
			pu, map[bool]string{true: "as the file gives them", false: "standard atomic weights"}[rep.masses != nil], rep.Units[string(quantity.Velocity)], res.Storage["velocity"]))
	}
	js, err := rec.JSON()
	if err == nil {
		err = w.SetParameter("trajvault_provenance", string(js))
	}
	if err != nil {
		w.Abort()
		return nil, err
	}
	if err := w.Close(); err != nil {
		return nil, err
	}
	return res, nil
}

// convertSources are the sources of the conversion pass: the records
// the scan spooled, else the files read again.
func convertSources(rep *TrajReport, opt Options) ([]source, error) {
	sf := rep.spool
	if sf == nil || sf.removed {
		return openSources(rep.traj, opt)
	}
	if len(sf.sections) != len(rep.Files) {
		return nil, fmt.Errorf("%s: %w (%d sections for %d files)", sf.path, errSpool, len(sf.sections), len(rep.Files))
	}
	f, err := os.Open(sf.path)
	if err != nil {
		return nil, fmt.Errorf("reading the spool of %s: %w", rep.Name, err)
	}
	srcs := make([]source, len(rep.Files))
	for i, fr := range rep.Files {
		s := newSpoolSource(f, sf.sections[i], fr)
		if i == 0 {
			// The sources share f, closed with the first when the
			// conversion ends (all are closed together).
			s.f = f
		}
		srcs[i] = s
	}
	return srcs, nil
}

type hashResult struct {
	sources []provenance.Source
	err     error
}

// hashSources computes the SHA-256 of every source file (and the recipe)
// in a goroutine, while the conversion runs; a file the scan hashed as
// it read it (FileReport.digest) is not read again.
func hashSources(ctx context.Context, rep *TrajReport, opt ConvertOptions) <-chan hashResult {
	ch := make(chan hashResult, 1)
	var files [][2]string
	done := map[int]provenance.Source{}
	for i, f := range rep.Files {
		if f.digest != nil {
			s := *f.digest
			s.Role = f.reader.ProvenanceRole
			done[i] = s
		}
		files = append(files, [2]string{f.File, f.reader.ProvenanceRole})
	}
	if opt.Recipe != nil && opt.Recipe.Path != "" {
		files = append(files, [2]string{opt.Recipe.Path, "recipe"})
	}
	go func() {
		var out hashResult
		for i, f := range files {
			if err := ctx.Err(); err != nil {
				out.err = err
				break
			}
			if s, ok := done[i]; ok {
				out.sources = append(out.sources, s)
				continue
			}
			s, err := provenance.HashFile(f[0])
			if err != nil {
				out.err = err
				break
			}
			s.Role = f[1]
			out.sources = append(out.sources, s)
		}
		ch <- out
	}()
	return ch
}

func where(p finding.Finding) string {
	if p.Line > 0 {
		return fmt.Sprintf("%s:%d", p.File, p.Line)
	}
	if p.File != "" {
		return p.File
	}
	return "trajectory"
}

func mergeRanges(r [][2]int) [][2]int {
	if len(r) == 0 {
		return nil
	}
	s := append([][2]int(nil), r...)
	sort.Slice(s, func(i, j int) bool { return s[i][0] < s[j][0] })
	out := [][2]int{s[0]}
	for _, x := range s[1:] {
		last := &out[len(out)-1]
		if x[0] <= last[1] {
			last[1] = max(last[1], x[1])
		} else {
			out = append(out, x)
		}
	}
	return out
}

// specFor builds the writer spec: what elements exist, their units and
// how each is stored.
func specFor(rep *TrajReport, opt ConvertOptions, res *Result) (trajfile.Spec, error) {
	zs := make([]int, len(rep.symbols))
	masses := make([]float64, len(rep.symbols))
	for i, s := range rep.symbols {
		zs[i] = elements.Number(s)
		if zs[i] == 0 {
			return trajfile.Spec{}, fmt.Errorf("%s: atom %d has symbol %q, not a chemical element", rep.Name, i+1, s)
		}
		m, ok := elements.Mass(zs[i])
		if rep.masses != nil {
			m, ok = rep.masses[i], true
		}
		if !ok {
			return trajfile.Spec{}, fmt.Errorf("%s: no standard atomic weight tabulated for %s; give masses in the geometry file (Properties=...:masses:R:1)", rep.Name, s)
		}
		masses[i] = m
	}
	has := func(q string) bool { _, ok := rep.formats[q]; return ok }
	u := rep.Units
	spec := trajfile.Spec{
		Author: opt.Author, Email: opt.Email, Creator: "trajvault", CreatorVersion: opt.ToolVersion,
		ObservablesOnly: rep.ObservablesOnly,
		Species:         zs, Masses: masses,
		Units: trajfile.Units{Length: u[string(quantity.Position)], Time: u[string(quantity.Time)], Velocity: u[string(quantity.Velocity)], Force: u[string(quantity.Force)],
			Energy: u[string(quantity.Energy)], Mass: "u", InverseTime: ""},
		Velocity: has(quantity.VelocityQ) || (has(quantity.MomentumQ) && u[string(quantity.Velocity)] != ""),
		Force:    has(quantity.ForceQ),
		Kinetic:  has(quantity.KineticEnergy), Potential: has(quantity.PotentialEnergy), Total: has(quantity.TotalEnergy),
		NStates: rep.States, StateEnergies: has(quantity.StateEnergy), Populations: has(quantity.Population),
		ActiveState:  rep.States > 0 && rep.hasActive(),
		Hops:         rep.Hops > 0,
		Storage:      map[string]trajfile.Storage{},
		SeriesFrames: seriesFrames(opt.SeriesFrames),
		File:         DefaultFile,
		Attrs:        map[string]string{},
	}
	if rep.masses != nil {
		spec.Units.Mass = u[string(quantity.Mass)]
		if spec.Units.Mass == "" {
			return spec, fmt.Errorf("%s: the geometry file gives masses but no unit for them; give --unit mass=u", rep.Name)
		}
	}
	if rep.momentaStored() && u[string(quantity.Velocity)] == "" {
		return spec, fmt.Errorf("%s: the geometry gives momenta but no unit for them; give --unit momentum=...", rep.Name)
	}
	if spec.NStates > 0 && !spec.StateEnergies && !spec.Populations && !spec.ActiveState {
		spec.NStates = 0
	}
	if rep.States > 0 && rep.Hops > 0 && !spec.ActiveState {
		spec.ActiveState = false
	}
	if opt.File != nil {
		spec.File = *opt.File
	}
	if rep.clock != nil && !opt.ExplicitClock {
		spec.Clock = rep.clock
	}
	if spec.Units.Time == "" {
		spec.Units.Time = opt.Units[string(quantity.Time)]
	}
	for q, fm := range rep.formats {
		el := quantity.Element(q)
		if name, ok := strings.CutPrefix(q, ExtraPrefix); ok {
			el = name
			spec.Extras = append(spec.Extras, trajfile.Extra{Name: name, Width: rep.extraWidth[name]})
		}
		if el == "" {
			continue
		}
		st := trajfile.Storage{Format: fm.String(), Decimals: -1}
		// Negative zeros keep their sign through scale-offset in a list
		// (trajfile.NegativeZerosAttr), up to a bound; beyond it float64.
		if fm.Fixed() && !opt.BitExact && rep.maxAbs[q]*math.Pow10(fm.Decimals) < maxExactScaled && rep.negZeros[q] <= trajfile.MaxNegativeZeros {
			st.Decimals = fm.Decimals
		}
		if tol, ok := opt.Tolerance[el]; ok && tol > 0 {
			// Fewest decimals whose rounding error, half a unit in the
			// last place plus float noise, stays within the bound.
			d := max(0, int(math.Ceil(-math.Log10(2*tol))))
			for 0.5*math.Pow10(-d)*(1+1e-9) > tol {
				d++
			}
			if !fm.Fixed() || d < fm.Decimals {
				st.Decimals = d
				st.Tolerance = tol
				st.Format = textnum.Format{Decimals: d}.String()
			}
		}
		spec.Storage[el] = st
		switch {
		case st.Tolerance > 0:
			res.Storage[el] = fmt.Sprintf("scale-offset, %d decimals, lossy within %g", st.Decimals, st.Tolerance)
		case st.Decimals >= 0 && rep.negZeros[q] > 0:
			res.Storage[el] = fmt.Sprintf("scale-offset, %d decimals (as printed, exact; %d negative zeros listed)", st.Decimals, rep.negZeros[q])
		case st.Decimals >= 0:
			res.Storage[el] = fmt.Sprintf("scale-offset, %d decimals (as printed, exact)", st.Decimals)
		default:
			res.Storage[el] = "float64, lossless"
		}
	}
	sort.Slice(spec.Extras, func(i, j int) bool { return spec.Extras[i].Name < spec.Extras[j].Name })
	for _, x := range spec.Extras {
		res.Storage[x.Name] += fmt.Sprintf("; per-atom column %s kept as %s (no unit: not a quantity trajvault knows)", x.Name, trajfile.Particle(trajfile.OurGroup, x.Name))
	}
	if spec.Clock != nil {
		res.Storage["time"] = "H5MD fixed mode (uniform sampling: offset and increment)"
	}
	if rep.momentaStored() {
		momentumStorage(rep, opt, &spec, res)
	}
	if opt.ForReaders {
		spec.ForReaders = true
		for k := range res.Storage {
			res.Storage[k] = "float64, converted for common readers (not the printed digits)"
		}
		res.Storage["time"] = "explicit clock, one step and time per frame (for common readers)"
	}
	if rep.States > 0 {
		spec.Attrs[trajfile.StateBaseAttr] = fmt.Sprint(rep.stateBase(opt.Options))
	}
	if !has(quantity.TimeQ) && opt.Dt > 0 {
		spec.Storage["time"] = dtStorage(opt.Dt, max(abs64(rep.FirstStep), abs64(rep.LastStep)))
	}
	var files []string
	for _, f := range rep.Files {
		files = append(files, f.File)
	}
	spec.Attrs["trajvault_sources"] = strings.Join(files, "\n")
	if len(res.Dropped) > 0 {
		spec.Attrs["trajvault_dropped"] = strings.Join(res.Dropped, "\n")
	}
	if rep.TimeStep > 0 {
		spec.TimeStep = rep.TimeStep
	}
	return spec, nil
}

func (t *TrajReport) hasActive() bool {
	for _, f := range t.Files {
		if f.active {
			return true
		}
	}
	return false
}

// keptIter yields the kept records of one source in order.
type keptIter struct {
	src     source
	rep     *FileReport
	idx     int
	dropped [][2]int
}

func newKeptIter(s source, fr *FileReport) *keptIter {
	return &keptIter{src: s, rep: fr, dropped: mergeRanges(fr.dropped)}
}

func (k *keptIter) next() (*record, error) {
	for {
		if k.rep.partial >= 0 && k.idx >= k.rep.partial {
			return nil, io.EOF
		}
		rec, err := k.src.next()
		if err != nil {
			return nil, err
		}
		i := k.idx
		k.idx++
		for len(k.dropped) > 0 && i >= k.dropped[0][1] {
			k.dropped = k.dropped[1:]
		}
		if len(k.dropped) > 0 && i >= k.dropped[0][0] {
			continue
		}
		return rec, nil
	}
}

// stream is the second pass: frames are assembled one at a time and
// written as they come. Parsing runs in one goroutine and HDF5 writing
// (compression) in another, so one conversion keeps two cores busy; the
// first error of either (or ctx's end) stops both.
func stream(ctx context.Context, rep *TrajReport, srcs []source, w *trajfile.Writer, opt ConvertOptions) error {
	type item struct {
		fr   *trajfile.Frame
		line int
	}
	geo := rep.frameFile()
	ch := make(chan item, 256)
	g, gctx := errgroup.WithContext(ctx)
	g.Go(func() error {
		for it := range ch {
			if err := gctx.Err(); err != nil {
				return err
			}
			if err := w.WriteFrame(it.fr); err != nil {
				return fmt.Errorf("%s:%d: %w", geo.File, it.line, err)
			}
		}
		return nil
	})
	g.Go(func() error {
		defer close(ch)
		return produce(gctx, rep, srcs, opt, func(fr *trajfile.Frame, line int) error {
			select {
			case ch <- item{fr, line}:
				return nil
			case <-gctx.Done():
				return gctx.Err()
			}
		})
	})
	return g.Wait()
}

// produce walks the geometry frames (observables only: the first
// table's records) and joins the other files' records to them by step
// (or by order when there are no steps), handing each assembled frame
// to emit; it stops at emit's first error.
func produce(ctx context.Context, rep *TrajReport, srcs []source, opt ConvertOptions, emit func(*trajfile.Frame, int) error) error {
	var geo *keptIter
	var others []*keptIter
	frames := rep.frameFile()
	for i, s := range srcs {
		it := newKeptIter(s, rep.Files[i])
		if rep.Files[i] == frames {
			geo = it
		} else if rep.Files[i].Kept > 0 { // event-only logs add no frames
			others = append(others, it)
		}
	}
	base := rep.stateBase(opt.Options)
	S := rep.States
	pending := make([]*record, len(others))
	var extras []string // in the writer's order (specFor sorts them)
	for q := range rep.formats {
		if name, ok := strings.CutPrefix(q, ExtraPrefix); ok {
			extras = append(extras, name)
		}
	}
	sort.Strings(extras)
	for n := 0; ; n++ {
		if n%checkEvery == 0 {
			if err := ctx.Err(); err != nil {
				return err
			}
		}
		g, err := geo.next()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return err
		}
		fr := &trajfile.Frame{}
		merged := *g
		key := int64(n)
		if g.hasStep {
			key = g.step
		}
		for i, it := range others {
			var r *record
			if it.rep.hasSteps && geo.rep.hasSteps {
				for {
					if pending[i] == nil {
						p, err := it.next()
						if err == io.EOF {
							return fmt.Errorf("%s: ends before step %d of the geometry", it.src.file(), key)
						}
						if err != nil {
							return err
						}
						pending[i] = p
					}
					if pending[i].step >= key {
						break
					}
					pending[i] = nil
				}
				if pending[i].step != key {
					return fmt.Errorf("%s: no record for step %d", it.src.file(), key)
				}
				r, pending[i] = pending[i], nil
			} else {
				p, err := it.next()
				if err != nil {
					return fmt.Errorf("%s: fewer records than geometry frames: %v", it.src.file(), err)
				}
				r = p
			}
			mergeRecord(&merged, r)
		}
		if merged.hasStep {
			key = merged.step
		}
		fr.Step = key
		switch {
		case merged.hasTime:
			fr.Time = merged.time
		case opt.Dt > 0:
			fr.Time = float64(key) * opt.Dt
		default:
			return fmt.Errorf("%s: frame %d has no time", rep.Name, n)
		}
		fr.Position = g.atom(quantity.PositionQ)
		if v := g.atom(quantity.VelocityQ); v != nil {
			fr.Velocity = v
		} else if p := g.atom(quantity.MomentumQ); p != nil {
			v := make([]float64, len(p))
			for i := range v {
				v[i] = p[i] / rep.massU(i/3, opt)
			}
			fr.Velocity = v
		}
		fr.Force = g.atom(quantity.ForceQ)
		for _, x := range extras {
			fr.Extras = append(fr.Extras, g.extra(x))
		}
		fr.Kinetic, fr.Potential, fr.Total = merged.scalar[0], merged.scalar[1], merged.scalar[2]
		if S > 0 {
			fr.StateEnergies = shiftStates(merged.stateE, base, S)
			fr.Populations = shiftStates(merged.pop, base, S)
			fr.ActiveState = merged.active - base
		}
		if err := emit(fr, g.line); err != nil {
			return err
		}
	}
}

// momentaStored reports whether velocities are derived from momenta.
func (t *TrajReport) momentaStored() bool {
	_, p := t.formats[quantity.MomentumQ]
	_, v := t.formats[quantity.VelocityQ]
	return p && !v
}

// momentumStorage chooses how velocities derived from momenta (v = p/m)
// are stored. p/m has no finite decimal form, so float64 storage keeps
// noise digits that compress badly. When the momenta were printed at D
// decimals, v is stored with scale-offset at D' = D + ceil(log10(1.01
// m_max)) decimals: then |m v_stored - p| <= m_max 0.5 10^-D' < 0.99 0.5
// 10^-D, so m v_stored rounded to D decimals gives back every printed
// momentum (the decimals of p/m beyond that are not information).
// Measured on an ASE-written run (13 Cu atoms, EMT, 2000 frames, momenta
// %.8f): 307 kB for the velocities against 543 kB as float64 p/m, and
// 0.88x xz -9 of the momentum text alone. The bound on v
// is recorded as a tolerance, the momentum's unit and printed format as
// /parameters attributes (trajvault_momentum_unit, _format), so that a
// reader can print the momenta again digit for digit.
func momentumStorage(rep *TrajReport, opt ConvertOptions, spec *trajfile.Spec, res *Result) {
	fm := rep.formats[quantity.MomentumQ]
	spec.Attrs[trajfile.MomentumFormatAttr] = fm.String()
	if pu := rep.Units[string(quantity.Momentum)]; pu != "" {
		spec.Attrs[trajfile.MomentumUnitAttr] = pu
	}
	mMax, mMin := 0.0, math.Inf(1)
	for i := range rep.symbols {
		m := rep.massU(i, opt)
		mMax, mMin = math.Max(mMax, m), math.Min(mMin, m)
	}
	d := fm.Decimals + int(math.Ceil(math.Log10(1.01*mMax)))
	vMax := rep.maxAbs[quantity.MomentumQ] / mMin
	if !fm.Fixed() || opt.BitExact || mMin <= 0 || d < 0 || vMax*math.Pow10(d) >= maxExactScaled || rep.negZeros[quantity.MomentumQ] > trajfile.MaxNegativeZeros {
		spec.Storage[trajfile.Velocity] = trajfile.Storage{Decimals: -1}
		res.Storage["velocity"] = "float64, lossless (momenta / masses)"
		return
	}
	tol := 0.5 * math.Pow10(-d)
	spec.Storage[trajfile.Velocity] = trajfile.Storage{Decimals: d, Tolerance: tol}
	res.Storage["velocity"] = fmt.Sprintf("scale-offset, %d decimals (momenta / masses, within %g; mass x velocity gives the momenta as printed, %d decimals)", d, tol, fm.Decimals)
	if n := rep.negZeros[quantity.MomentumQ]; n > 0 {
		res.Storage["velocity"] = strings.TrimSuffix(res.Storage["velocity"], ")") + fmt.Sprintf("; %d negative zeros listed)", n)
	}
}

// dtStorage is how times computed as step x dt are stored (issue 10): a
// whole step times dt printed with D decimals has at most D decimals, so
// scale-offset at D stores it exactly and the recorded format fixed:D
// prints it as 0.3, not 0.30000000000000004. D is the decimals of dt's
// shortest decimal form; float64 when the scaled times would not be
// exact.
func dtStorage(dt float64, maxStep int64) trajfile.Storage {
	s := strconv.FormatFloat(dt, 'f', -1, 64)
	d := 0
	if i := strings.IndexByte(s, '.'); i >= 0 {
		d = len(s) - i - 1
	}
	if float64(maxStep)*dt*math.Pow10(d) >= maxExactScaled {
		return trajfile.Storage{Decimals: -1}
	}
	return trajfile.Storage{Decimals: d, Format: textnum.Format{Decimals: d}.String()}
}

func abs64(x int64) int64 {
	if x < 0 {
		return -x
	}
	return x
}

// massU is atom i's mass in u, for turning momenta into velocities.
func (t *TrajReport) massU(i int, opt ConvertOptions) float64 {
	if t.masses != nil {
		f, err := units.Factor(t.Units[string(quantity.Mass)], "u")
		if err == nil {
			return t.masses[i] * f
		}
	}
	m, _ := elements.Mass(elements.Number(t.symbols[i]))
	return m
}

func shiftStates(v []float64, base, S int) []float64 {
	if len(v) == 0 {
		return nil
	}
	out := make([]float64, S)
	for k := range out {
		i := k + base
		if i < len(v) {
			out[k] = v[i]
		} else {
			out[k] = math.NaN()
		}
	}
	return out
}

// mergeRecord copies into dst what r has and dst lacks.
func mergeRecord(dst, r *record) {
	if r.hasStep && !dst.hasStep {
		dst.step, dst.hasStep = r.step, true
	}
	if r.hasTime && !dst.hasTime {
		dst.time, dst.hasTime = r.time, true
	}
	for i := range r.hasScalar {
		if r.hasScalar[i] && !dst.hasScalar[i] {
			dst.scalar[i], dst.hasScalar[i] = r.scalar[i], true
		}
	}
	if len(r.stateE) > 0 && len(dst.stateE) == 0 {
		dst.stateE = r.stateE
	}
	if len(r.pop) > 0 && len(dst.pop) == 0 {
		dst.pop = r.pop
	}
	if r.hasActive && !dst.hasActive {
		dst.active, dst.hasActive = r.active, true
	}
}

// ErrRefused is returned when a scan found problems that forbid
// conversion (see TrajReport.Refusal); nothing was written.
var ErrRefused = errors.New("the logs have problems; nothing written")

// ConvertFiles converts the trajectory made of paths (files, or one
// folder, as TrajectoryFrom reads them) to out: scan, refuse by the one
// rule, convert. The report is returned whenever the scan ran, so that
// the caller can show its problems. When ctx is cancelled it returns
// ctx.Err() and leaves nothing under out.
func ConvertFiles(ctx context.Context, paths []string, out string, opt ConvertOptions) (*TrajReport, *Result, error) {
	t, err := TrajectoryFrom(paths, opt.Recipe)
	if err != nil {
		return nil, nil, err
	}
	sopt := opt.Options
	if sopt.SpoolDir == "" {
		// One parse: the conversion replays what the scan read.
		sopt.SpoolDir = SpoolDirFor(out)
	}
	rep, err := Scan(ctx, t, sopt)
	if err != nil {
		return nil, nil, err
	}
	if rep.Refusal(opt.DropPartial) != nil {
		rep.Discard()
		return rep, nil, fmt.Errorf("%s: %w", t.Name, ErrRefused)
	}
	res, err := Convert(ctx, rep, out, opt)
	return rep, res, err
}

// SpoolDirFor is the folder for the spool (Options.SpoolDir) of a
// conversion into out: out's folder, on the output's file system, when
// it exists; else "" (no spool: a missing folder is left to the
// writer's error or to the caller that makes it, as without a spool).
func SpoolDirFor(out string) string {
	d := filepath.Dir(filepath.Clean(out))
	if st, err := os.Stat(d); err == nil && st.IsDir() {
		return d
	}
	return ""
}

// readerKinds pairs unit kinds with the unit trajfile.ReaderUnits stores
// them in.
func readerKinds() map[string]string {
	r := trajfile.ReaderUnits
	return map[string]string{
		string(quantity.Position): r.Length, string(quantity.Time): r.Time, string(quantity.Velocity): r.Velocity,
		string(quantity.Force): r.Force, string(quantity.Energy): r.Energy, string(quantity.Mass): r.Mass,
	}
}

// storedUnits are the units of the stored numbers: the logs' units, or
// with ForReaders the readers' units of the kinds converted.
func storedUnits(logs map[string]string, opt ConvertOptions) map[string]string {
	if !opt.ForReaders {
		return logs
	}
	out := make(map[string]string, len(logs))
	for k, u := range logs {
		out[k] = u
		if r, ok := readerKinds()[k]; ok {
			out[k] = r
		}
	}
	return out
}

// readerConversion says, for the provenance, what ForReaders converted.
func readerConversion(logs map[string]string) string {
	var parts []string
	kinds := readerKinds()
	for _, k := range slices.Sorted(maps.Keys(kinds)) {
		if from, ok := logs[k]; ok && from != kinds[k] {
			parts = append(parts, fmt.Sprintf("%s %s -> %s", k, from, kinds[k]))
		}
	}
	if len(parts) == 0 {
		return "converted for common readers: no unit needed converting (CODATA 2018 factors)"
	}
	return "converted for common readers (CODATA 2018 factors): " + strings.Join(parts, "; ")
}

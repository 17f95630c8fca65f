package trajfile

// Setup is what a file says about how its run was set up, read for
// comparing two runs: the creator, the string attributes of /parameters
// (method, integrator, the provenance record as JSON, ...), the recorded
// time step and its unit, and the unit of every time-dependent element.
type Setup struct {
	Creator, CreatorVersion string
	// Parameters are the string attributes of /parameters, by name.
	Parameters map[string]string
	// TimeStep as stored, in TimeStepUnit; 0 when not recorded.
	TimeStep     float64
	TimeStepUnit string
	// Units maps element paths to their unit attribute ("" when absent).
	Units map[string]string
}

// Setup reads the setup of the file. Missing parts are left empty: a file
// from another writer may lack any of them.
func (r *Reader) Setup() *Setup {
	s := &Setup{Parameters: map[string]string{}, Units: map[string]string{}}
	if a, err := r.f.Attr(CreatorGroup, "name"); err == nil && len(a.Strings) == 1 {
		s.Creator = a.Strings[0]
	}
	if a, err := r.f.Attr(CreatorGroup, "version"); err == nil && len(a.Strings) == 1 {
		s.CreatorVersion = a.Strings[0]
	}
	names, _ := r.f.AttrNames(ParametersGroup)
	for _, n := range names {
		if a, err := r.f.Attr(ParametersGroup, n); err == nil && len(a.Strings) == 1 {
			s.Parameters[n] = a.Strings[0]
		}
	}
	if v, _, err := r.f.ReadFloat64(TimeStep); err == nil && len(v) == 1 {
		s.TimeStep = v[0]
		if a, err := r.f.Attr(TimeStep, UnitAttr); err == nil && len(a.Strings) == 1 {
			s.TimeStepUnit = a.Strings[0]
		}
	}
	for _, el := range []string{r.Particle(Position), r.Particle(Velocity), r.Particle(Force),
		KineticEnergy, PotentialEnergy, TotalEnergy, StateEnergies, Couplings} {
		if !r.Has(el) {
			continue
		}
		u := ""
		if a, err := r.f.Attr(el+Value, UnitAttr); err == nil && len(a.Strings) == 1 {
			u = a.Strings[0]
		}
		s.Units[el] = u
	}
	return s
}

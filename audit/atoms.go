package audit

import (
	"fmt"
	"strings"

	"trajvault/internal/trajfile"
)

// H5MD 1.1 makes a particle group's mass and species optional. The
// checks below weigh atoms by mass or pick bonds by element; on a group
// without them they do not run and say why (verdict n/a, "not run: ..."),
// and every other check runs as usual.

// atomNeeds is what per-atom data each check needs beyond what it tests
// itself, by code (codes are stable), and the path its finding points at.
func (a *auditor) atomNeeds(code string) (mass, species bool, path string) {
	vel := a.r.Particle(trajfile.Velocity)
	switch code {
	case "A1": // E_tot = V + K needs K from velocities and masses
		return a.kineticFromAtoms(), false, a.energyPath()
	case "A2": // sigma_F weighs by sum 3/(2 m_i)
		return true, false, a.energyPath()
	case "A3": // accelerations F/m; bonds from covalent radii
		return true, true, a.r.Particle(trajfile.Force)
	case "A7": // P = sum m v
		return true, false, vel
	case "A8": // X-H pairs and their reduced masses
		return true, true, vel
	}
	return false, false, ""
}

// runCheck runs spec's check, or says why it cannot run on this group.
func (a *auditor) runCheck(spec Spec, d *derived) (Check, string) {
	mass, species, path := a.atomNeeds(spec.Code)
	if n := len(a.r.Groups()); a.kineticFromAtoms() && n > 1 && (spec.Code == "A1" || spec.Code == "A2") {
		// Observables are the whole system's (H5MD 1.1: particle groups
		// are subsets of one system): a kinetic energy formed from one
		// group of several is not the system's.
		return result(NA, nil, "needs a stored kinetic or total energy: %s", fmt.Sprintf("the kinetic energy of one particle group of %d is not the system's", n)), path
	}
	var why []string
	if mass && a.r.Masses == nil {
		why = append(why, a.r.NoMasses)
	}
	if species && a.r.Species == nil {
		why = append(why, a.r.NoSpecies)
	}
	if len(why) > 0 {
		need := map[[2]bool]string{{true, false}: "the atoms' masses", {false, true}: "the atoms' species", {true, true}: "the atoms' masses and species"}[[2]bool{mass, species}]
		return result(NA, nil, "needs %s; %s", need, strings.Join(why, "; ")), path
	}
	return spec.file(a, d)
}

// kineticFromAtoms reports whether E_tot must be formed as V + K with K
// from the stored velocities and masses.
func (a *auditor) kineticFromAtoms() bool {
	r := a.r
	return !r.Has(trajfile.TotalEnergy) && !r.Has(trajfile.KineticEnergy) && r.Has(trajfile.PotentialEnergy)
}

package main

import (
	"fmt"
	"path/filepath"

	"trajvault/ingest"
	"trajvault/internal/trajfile"
	"trajvault/pack"
	"trajvault/schema"
	"trajvault/validate"
)

// takeConverted splits off the trajectories that are one file already in
// trajvault's layout (a file that claims it: validate.Select) so that
// pack copies them instead of converting them again; foreign H5MD files
// stay in rest and are repacked by ingest like any other source. Each
// taken file must pass validate under the trajvault profile, or pack
// prints the findings and stops (exit 1) before anything is written.
func takeConverted(g *globals, trajs []*ingest.Trajectory) (rest, taken []*ingest.Trajectory, err error) {
	bad := 0
	for _, t := range trajs {
		if len(t.Inputs) != 1 || t.Inputs[0].Format != ingest.KindH5MD {
			rest = append(rest, t)
			continue
		}
		rep, err := validate.File(t.Inputs[0].Path, validate.Options{ToolVersion: toolVersion()})
		if err != nil {
			return nil, nil, &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
		}
		if rep.Profile != string(validate.ProfileTrajvault) {
			rest = append(rest, t) // foreign: repacked
			continue
		}
		if _, err := trajfile.Parameter(t.Inputs[0].Path, trajfile.ProvenanceAttr); err != nil && rep.OK() {
			bad++
			fmt.Fprintf(g.stderr, "trajvault: pack: %s is in trajvault's layout but has no provenance record (%s@%s): pack copies only files that convert wrote; convert its sources instead\n", t.Inputs[0].Path, trajfile.ParametersGroup, trajfile.ProvenanceAttr)
		}
		if !rep.OK() {
			bad++
			fmt.Fprintf(g.stderr, "trajvault: pack: %s claims trajvault's layout but fails validate (%d errors):\n", t.Inputs[0].Path, rep.Errors)
			for _, f := range rep.Findings {
				wrap(&globals{stdout: g.stderr}, f.String(), "  ")
			}
		}
		taken = append(taken, t)
	}
	if bad > 0 {
		fmt.Fprintf(g.stderr, "trajvault: pack: %d file(s) in trajvault's layout cannot be copied; nothing written\n", bad)
		return nil, nil, errFindings
	}
	return rest, taken, nil
}

// copyConverted copies the taken files into the staging folder, each as
// data/trajectories/NAME.h5, with a report naming its one source.
func copyConverted(staging string, taken []*ingest.Trajectory) ([]pack.Converted, error) {
	var out []pack.Converted
	for _, t := range taken {
		file := schema.TrajectoriesDir + "/" + t.Name + schema.TrajectoryExt
		if err := pack.CopyTrajectory(t.Inputs[0].Path, filepath.Join(staging, filepath.FromSlash(file))); err != nil {
			return nil, err
		}
		rep := &ingest.TrajReport{Name: t.Name, Files: []*ingest.FileReport{{File: t.Inputs[0].Path, Format: ingest.KindH5MD}}}
		out = append(out, pack.Converted{Report: rep, File: file})
	}
	return out, nil
}

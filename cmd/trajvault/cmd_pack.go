package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"time"

	"trajvault/ingest"

	"github.com/spf13/cobra"

	"trajvault/audit"
	"trajvault/internal/bagit"
	"trajvault/pack"
)

type packOptions struct {
	readFlags
	out         string
	deposit     string
	md5         bool
	keepSources bool
	archive     string
	force       bool
	jobs        int
	maxFiles    int
	maxRecordGB float64
	maxFileGB   float64
	noAudit     bool
	split       bool
}

func (o *packOptions) AddFlags(c *cobra.Command) {
	o.readFlags.AddFlags(c)
	c.Flags().StringVarP(&o.out, "output", "o", "", "bundle folder to write (a BagIt bag)")
	c.Flags().StringVar(&o.deposit, "deposit", "deposit.yaml", "deposit description (write one with trajvault init)")
	c.Flags().BoolVar(&o.md5, "md5", false, "add an md5 manifest beside sha512 and sha256 (repositories often show md5)")
	c.Flags().BoolVar(&o.keepSources, "keep-sources", false, "add the original logs, zstd-compressed, so the deposit can be re-derived")
	c.Flags().StringVar(&o.archive, "archive", "", "also write the bag as one upload file beside it: tar.zst or zip")
	c.Flags().BoolVar(&o.force, "force", false, "replace an existing bundle")
	c.Flags().IntVarP(&o.jobs, "jobs", "j", runtime.NumCPU(), "trajectories converted at once")
	c.Flags().IntVar(&o.maxFiles, "max-files", 100, "repository limit: files per record (warn above)")
	c.Flags().Float64Var(&o.maxRecordGB, "max-record-gb", 50, "repository limit: GB per record (warn above)")
	c.Flags().Float64Var(&o.maxFileGB, "max-file-gb", 10, "repository limit: GB per file (warn above)")
	c.Flags().BoolVar(&o.noAudit, "no-audit", false, "leave the physics audit out of the dataset card")
	c.Flags().BoolVar(&o.split, "split", false, "when the limits are exceeded, write several bags BUNDLE-1, BUNDLE-2, ... (Bag-Group-Identifier, Bag-Count)")
}

func newPackCommand(g *globals) *cobra.Command {
	var o packOptions
	c := &cobra.Command{
		Use:   "pack DIR -o BUNDLE --deposit deposit.yaml",
		Short: "Turn an ensemble of text logs into a repository-ready BagIt bundle",
		Long: `pack scans and converts every trajectory of DIR (in parallel), then writes a
BagIt 1.0 bag (RFC 8493): bagit.txt, bag-info.txt, sha512 and sha256
manifests (and md5 with --md5), tag manifests, and under data/ the
trajectory files, ro-crate-metadata.json (RO-Crate 1.1), datacite.json
(DataCite 4.5), a README.md dataset card with the physics audit and plots,
and with --keep-sources the original logs compressed with zstd.

The bundle is written to BUNDLE.partial and renamed at the end: an
interrupted pack leaves no BUNDLE. Licensing and third-party rights remain
the depositor's responsibility.

Exit status: 0 success, 1 the logs have problems (nothing written),
2 usage or I/O error.`,
		Example: "  trajvault init --title \"...\" --creator \"Family, Given\"\n  trajvault pack runs/ -o deposit-bag --deposit deposit.yaml --recipe lab.yaml",
		Args:    cobra.ExactArgs(1),
		PreRunE: func(c *cobra.Command, args []string) error {
			if o.out == "" {
				return &exitError{exitUsage, errors.New("pack: name the bundle folder with -o, e.g. -o deposit-bag")}
			}
			if o.archive != "" && o.archive != "tar.zst" && o.archive != "zip" {
				return &exitError{exitUsage, fmt.Errorf("pack: --archive %q: use tar.zst or zip", o.archive)}
			}
			return nil
		},
		RunE: func(c *cobra.Command, args []string) error { return runPack(g, o, args[0]) },
	}
	o.AddFlags(c)
	return c
}

func runPack(g *globals, o packOptions, dir string) error {
	out := filepath.Clean(o.out)
	if _, err := os.Stat(out); err == nil && !o.force {
		return &exitError{exitUsage, fmt.Errorf("pack: %s already exists; use --force to replace it", out)}
	}
	dep, err := pack.LoadDeposit(o.deposit)
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
	}
	opt, err := o.options()
	if err != nil {
		return err
	}
	trajs, err := ingest.Discover(dir, opt.Recipe)
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
	}
	reps, err := scanAll(g, "pack", trajs, opt, o.jobs, false)
	if err != nil {
		return err
	}
	tmp := out + ".partial"
	os.RemoveAll(tmp) // a previous interrupted run
	if err := os.MkdirAll(filepath.Join(tmp, "data", "trajectories"), 0o755); err != nil {
		return &exitError{exitUsage, err}
	}
	fail := func(err error) error {
		os.RemoveAll(tmp)
		return &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
	}
	copt := ingest.ConvertOptions{Options: opt, Author: dep.Creators[0].Name, ToolVersion: toolVersion(),
		CommandLine: append([]string{"trajvault"}, os.Args[1:]...)}
	conv := make([]pack.Converted, len(trajs))
	errs := make([]error, len(trajs))
	parallel(len(trajs), o.jobs, func(i int) {
		rel := "data/trajectories/" + trajs[i].Name + ".h5"
		res, err := ingest.Convert(reps[i], filepath.Join(tmp, filepath.FromSlash(rel)), copt)
		conv[i], errs[i] = pack.Converted{Report: reps[i], Result: res, File: rel}, err
	})
	for _, err := range errs {
		if err != nil {
			return fail(err)
		}
	}
	bo := pack.BundleOptions{Deposit: dep, Algorithms: []string{"sha512", "sha256"}, KeepSources: o.keepSources,
		Jobs: o.jobs, ToolVersion: toolVersion(), Now: time.Now(), Plots: map[string][]byte{}}
	if o.md5 {
		bo.Algorithms = append(bo.Algorithms, "md5")
	}
	if !o.noAudit {
		var files []string
		for _, c := range conv {
			files = append(files, filepath.Join(tmp, filepath.FromSlash(c.File)))
		}
		rep, err := audit.Ensemble(context.Background(), files, audit.DefaultSettings, o.jobs)
		if err != nil {
			return fail(err)
		}
		for _, t := range rep.Trajectories {
			if t.Error != "" { // as before: a file pack just wrote must be auditable
				return fail(errors.New(t.Error))
			}
		}
		bo.AuditLines = append(bo.AuditLines, fmt.Sprintf("Overall verdict: %s; %d of %d trajectories flagged.", rep.Verdict, rep.Flagged, len(rep.Trajectories)))
		for _, c := range rep.Ensemble {
			bo.AuditLines = append(bo.AuditLines, fmt.Sprintf("%s: %s - %s", c.Name, c.Verdict, c.Summary))
		}
		if svg, err := rep.PopulationSVG(); err == nil && svg != nil {
			bo.Plots["populations.svg"] = svg
		}
		if svg, err := rep.EnergySVG(); err == nil {
			bo.Plots["energy-deviation.svg"] = svg
		}
	}
	if groups := splitGroups(tmp, conv, o); o.split && len(groups) > 1 {
		return packGroups(g, o, out, tmp, conv, groups, bo)
	}
	if err := pack.WriteBundle(tmp, conv, bo); err != nil {
		return fail(err)
	}
	warnLimits(g, tmp, o)
	if o.force {
		os.RemoveAll(out)
	}
	if err := os.Rename(tmp, out); err != nil {
		return fail(err)
	}
	fmt.Fprintf(g.stdout, "bundle: %s (%d trajectories; BagIt 1.0, %s)\ncard:   %s\n", out, len(conv), strings.Join(bo.Algorithms, ", "), filepath.Join(out, "data", "README.md"))
	if o.archive != "" {
		arch := out + "." + o.archive
		if err := writeArchive(out, arch, o.archive, o.force); err != nil {
			return &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
		}
		fmt.Fprintf(g.stdout, "upload: %s\n", arch)
	}
	return nil
}

func writeArchive(dir, path, kind string, force bool) error {
	if _, err := os.Stat(path); err == nil && !force {
		return fmt.Errorf("%s already exists; use --force to replace it", path)
	}
	tmp := path + ".partial"
	f, err := os.Create(tmp)
	if err != nil {
		return err
	}
	mtime := time.Now().UTC().Truncate(time.Second)
	if kind == "zip" {
		err = bagit.WriteZip(dir, f, mtime)
	} else {
		err = bagit.WriteTarZst(dir, f, mtime)
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		os.Remove(tmp)
		return err
	}
	return os.Rename(tmp, path)
}

// warnLimits reports what a general-purpose repository may refuse.
func warnLimits(g *globals, dir string, o packOptions) {
	var files int
	var total, biggest int64
	filepath.Walk(dir, func(p string, info os.FileInfo, err error) error {
		if err == nil && info.Mode().IsRegular() {
			files++
			total += info.Size()
			biggest = max(biggest, info.Size())
		}
		return nil
	})
	const gb = 1e9
	if files > o.maxFiles {
		fmt.Fprintf(g.stderr, "trajvault: pack: warning: %d files exceed the repository limit of %d per record; upload the --archive file instead\n", files, o.maxFiles)
	}
	if float64(total) > o.maxRecordGB*gb {
		fmt.Fprintf(g.stderr, "trajvault: pack: warning: %.1f GB exceed the limit of %g GB per record; split the ensemble into several bundles\n", float64(total)/gb, o.maxRecordGB)
	}
	if float64(biggest) > o.maxFileGB*gb {
		fmt.Fprintf(g.stderr, "trajvault: pack: warning: a file of %.1f GB exceeds the limit of %g GB per file\n", float64(biggest)/gb, o.maxFileGB)
	}
}

// metadataFiles is what a bag holds besides its trajectories (card,
// crate, DataCite, plots, provenance, tag files): reserved when splitting.
const metadataFiles = 12

// splitGroups partitions the trajectories, in order, into groups that keep
// each bag within the file and size limits.
func splitGroups(dir string, conv []pack.Converted, o packOptions) [][]pack.Converted {
	const gb = 1e9
	var groups [][]pack.Converted
	var cur []pack.Converted
	var size float64
	for _, c := range conv {
		st, err := os.Stat(filepath.Join(dir, filepath.FromSlash(c.File)))
		s := 0.0
		if err == nil {
			s = float64(st.Size())
		}
		// Two files per trajectory: the data and its provenance.
		if len(cur) > 0 && (2*(len(cur)+1)+metadataFiles > o.maxFiles || size+s > o.maxRecordGB*gb) {
			groups = append(groups, cur)
			cur, size = nil, 0
		}
		cur = append(cur, c)
		size += s
	}
	if len(cur) > 0 {
		groups = append(groups, cur)
	}
	return groups
}

// packGroups writes one bag per group, BUNDLE-1 ... BUNDLE-n, each
// complete in itself, all or nothing.
func packGroups(g *globals, o packOptions, out, staging string, conv []pack.Converted, groups [][]pack.Converted, bo pack.BundleOptions) error {
	var dirs []string
	cleanup := func() {
		for _, d := range dirs {
			os.RemoveAll(d)
		}
		os.RemoveAll(staging)
	}
	for i, grp := range groups {
		final := fmt.Sprintf("%s-%d", out, i+1)
		if _, err := os.Stat(final); err == nil && !o.force {
			cleanup()
			return &exitError{exitUsage, fmt.Errorf("pack: %s already exists; use --force to replace it", final)}
		}
		d := final + ".partial"
		os.RemoveAll(d)
		dirs = append(dirs, d)
		if err := os.MkdirAll(filepath.Join(d, "data", "trajectories"), 0o755); err != nil {
			cleanup()
			return &exitError{exitUsage, err}
		}
		for _, c := range grp {
			if err := os.Rename(filepath.Join(staging, filepath.FromSlash(c.File)), filepath.Join(d, filepath.FromSlash(c.File))); err != nil {
				cleanup()
				return &exitError{exitUsage, err}
			}
		}
		b := bo
		b.GroupID, b.GroupIndex, b.GroupCount = filepath.Base(out), i+1, len(groups)
		if err := pack.WriteBundle(d, grp, b); err != nil {
			cleanup()
			return &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
		}
	}
	os.RemoveAll(staging)
	for i, d := range dirs {
		final := strings.TrimSuffix(d, ".partial")
		if o.force {
			os.RemoveAll(final)
		}
		if err := os.Rename(d, final); err != nil {
			return &exitError{exitUsage, err}
		}
		fmt.Fprintf(g.stdout, "bundle %d of %d: %s (%d trajectories)\n", i+1, len(dirs), final, len(groups[i]))
	}
	return nil
}

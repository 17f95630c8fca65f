package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"

	"github.com/spf13/cobra"

	"trajvault/audit"
	"trajvault/ingest"
	"trajvault/internal/epoch"
	"trajvault/internal/finding"
	"trajvault/pack"
	"trajvault/schema"
)

type packOptions struct {
	readFlags
	conversionFlags
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
	require     string
	json        bool
	split       bool
	// workerArgs are the conversion flags the user set, for workers.
	workerArgs []string
	shard      string // I/N: convert one shard into BUNDLE.shards
	gather     bool   // make the bundle from the shards' files
}

func (o *packOptions) AddFlags(c *cobra.Command) {
	o.readFlags.AddFlags(c)
	o.conversionFlags.AddFlags(c) // the same conversion as convert
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
	c.Flags().BoolVar(&o.noAudit, "no-audit", false, "leave the physics audit out of the data description")
	c.Flags().BoolVar(&o.json, "json", false, "print the result as one JSON document (tool, command, findings, result)")
	c.Flags().StringVar(&o.require, "require-audit", "", "refuse (exit 1, nothing written) unless the audit verdict is at best ok, or at worst warn")
	c.Flags().BoolVar(&o.split, "split", false, "when the limits are exceeded, write several bags BUNDLE-1, BUNDLE-2, ... (Bag-Group-Identifier, Bag-Count)")
	c.Flags().StringVar(&o.shard, "shard", "", "convert shard I of N of the ensemble (I/N, e.g. 0/8) into BUNDLE.shards: one job of a cluster job array; done trajectories are skipped by checksum")
	c.Flags().BoolVar(&o.gather, "gather", false, "make the bundle from the files the shards wrote into BUNDLE.shards (no conversion)")
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
(DataCite 4.5), a README.md data description with the physics audit and plots,
and with --keep-sources the original logs compressed with zstd.

The bundle is built in a hidden folder beside it (.BUNDLE.partial-*) and
renamed at the end: an interrupted pack leaves no BUNDLE. With --force an
existing BUNDLE is swapped for the new one in one step and stays complete
until then. Licensing and third-party rights remain
the depositor's responsibility.

On a cluster, "pack --shard I/N" converts every N-th trajectory into
BUNDLE.shards (one job of an array; run again, it skips what its ledger
says is done and unchanged), and "pack --gather" then makes the bundle
from those files without converting again; trajvault slurm pack writes
the job scripts. Give every run the same conversion flags. With
SOURCE_DATE_EPOCH set (reproducible-builds.org), the same logs give the
same payload, byte for byte, however and wherever they were packed.

Exit status: 0 success, 1 the logs have problems (nothing written),
or a gather finds trajectories no shard has converted, 2 usage or I/O
error.`,
		Example: "  trajvault init --title \"...\" --creator \"Family, Given\"\n  trajvault pack runs/ -o deposit-bag --deposit deposit.yaml --recipe lab.yaml\n  trajvault pack runs/ -o deposit-bag --recipe lab.yaml --shard 0/2   # and 1/2\n  trajvault pack runs/ -o deposit-bag --recipe lab.yaml --gather",
		Args:    cobra.ExactArgs(1),
		PreRunE: func(c *cobra.Command, args []string) error {
			if o.out == "" {
				return &exitError{exitUsage, errors.New("pack: name the bundle folder with -o, e.g. -o deposit-bag")}
			}
			if o.require != "" && o.require != "ok" && o.require != "warn" {
				return &exitError{exitUsage, fmt.Errorf("pack: --require-audit %q: use ok or warn", o.require)}
			}
			if o.require != "" && o.noAudit {
				return &exitError{exitUsage, errors.New("pack: --require-audit needs the audit; drop --no-audit")}
			}
			if err := o.conversionFlags.check("pack"); err != nil {
				return err
			}
			if o.archive != "" && o.archive != "tar.zst" && o.archive != "zip" {
				return &exitError{exitUsage, fmt.Errorf("pack: --archive %q: use tar.zst or zip", o.archive)}
			}
			if o.shard != "" && o.gather {
				return &exitError{exitUsage, errors.New("pack: --shard converts, --gather assembles: give one, e.g. --shard 0/8 on every array task, then --gather once")}
			}
			if o.shard != "" {
				if _, err := parseShard(o.shard); err != nil {
					return &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
				}
			}
			return nil
		},
		RunE: func(c *cobra.Command, args []string) error {
			o.workerArgs = workerFlags(c)
			return runPack(c.Context(), g, o, args[0])
		},
	}
	o.AddFlags(c)
	return c
}

func runPack(ctx context.Context, g *globals, o packOptions, dir string) error {
	out := filepath.Clean(o.out)
	if _, err := os.Stat(out); err == nil && !o.force && o.shard == "" {
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
	trajs, taken, err := takeConverted(g, trajs) // .h5 files already converted are copied
	if err != nil {
		return err
	}
	tol, err := parseTolerances(o.tolerance)
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
	}
	if o.author == "" {
		o.author = dep.Creators[0].Name // the deposit's first creator
	}
	// The same settings give the same files: locally, in workers, or
	// shard by shard on a cluster (with SOURCE_DATE_EPOCH set, byte for
	// byte).
	settings := append(slices.Clone(o.workerArgs), "--author="+o.author)
	copt := o.conversionFlags.packOptions(opt, tol)
	copt.CommandLine = packCommandLine(o.workerArgs, dir)
	shards := out + ".shards"
	if o.shard != "" {
		return runShard(ctx, g, shardRun{verb: "pack", spec: o.shard, root: dir, out: shards, trajs: trajs,
			opt: opt, copt: copt, settings: settings, dropPartial: o.dropPartial})
	}
	var conv []pack.Converted
	var tmp string
	if o.gather {
		entries, missing, err := gatherLedger(dir, shards, trajs, settings)
		if err != nil {
			return &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
		}
		if len(missing) > 0 {
			return reportMissing(g, "pack", missing, len(trajs))
		}
		if tmp, err = pack.NewStaging(out); err != nil {
			return &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
		}
		for _, e := range entries {
			file := schema.TrajectoriesDir + "/" + e.Name + schema.TrajectoryExt
			if err := linkOrCopy(filepath.Join(shards, e.Name+".h5"), filepath.Join(tmp, filepath.FromSlash(file))); err != nil {
				os.RemoveAll(tmp)
				return &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
			}
			conv = append(conv, pack.Converted{Report: e.Report, File: file})
		}
	} else {
		if tmp, conv, err = packConvert(ctx, g, o, dir, trajs, opt, copt); err != nil {
			return err
		}
	}
	fail := func(err error) error {
		os.RemoveAll(tmp)
		return &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
	}
	copied, err := copyConverted(tmp, taken)
	if err != nil {
		return fail(err)
	}
	conv = append(conv, copied...)
	bo := pack.BundleOptions{Deposit: dep, Algorithms: []string{"sha512", "sha256"}, KeepSources: o.keepSources,
		Jobs: o.jobs, ToolVersion: toolVersion(), Now: epoch.Now(), Plots: map[string][]byte{}}
	if o.md5 {
		bo.Algorithms = append(bo.Algorithms, "md5")
	}
	auditVerdict := "not run"
	if !o.noAudit {
		var files []string
		for _, c := range conv {
			files = append(files, filepath.Join(tmp, filepath.FromSlash(c.File)))
		}
		auditing := newBar(g, "audit", "files")
		rep, err := audit.Ensemble(ctx, files, audit.DefaultSettings, o.jobs, auditing)
		auditing.Finish()
		if err != nil {
			return fail(err)
		}
		for _, t := range rep.Trajectories {
			if t.Error != "" { // a file pack just wrote must be auditable
				return fail(errors.New(t.Error))
			}
		}
		auditVerdict = string(rep.Verdict)
		verdict := fmt.Sprintf("%s; %d of %d trajectories flagged", rep.Verdict, rep.Flagged, len(rep.Trajectories))
		fmt.Fprintf(g.stderr, "trajvault: pack: audit verdict %s (details in the bundle's data/README.md;\n  run trajvault audit --report FILE.html on the bundle for the full report)\n", verdict)
		if !auditAccepted(rep.Verdict, o.require) {
			os.RemoveAll(tmp)
			fmt.Fprintf(g.stderr, "trajvault: pack: --require-audit %s: the audit says %s; nothing written\n", o.require, rep.Verdict)
			return errFindings
		}
		bo.AuditLines = append(bo.AuditLines, "Overall verdict: "+verdict+".")
		for _, c := range rep.Ensemble {
			bo.AuditLines = append(bo.AuditLines, fmt.Sprintf("%s: %s - %s", c.Name, c.Verdict, c.Summary))
		}
		if svg, err := rep.PopulationSVG(toolVersion()); err == nil && svg != nil {
			bo.Plots["populations.svg"] = svg
		}
		if svg, err := rep.EnergySVG(toolVersion()); err == nil {
			bo.Plots["energy-deviation.svg"] = svg
		}
	}
	hashing := newBar(g, "checksums", "B")
	bo.Progress = hashing
	lim := pack.Limits{MaxFiles: o.maxFiles, MaxRecordBytes: int64(o.maxRecordGB * 1e9), MaxFileBytes: int64(o.maxFileGB * 1e9)}
	bags, err := pack.Assemble(ctx, tmp, out, conv, bo, lim, o.split, o.force)
	hashing.Finish()
	if err != nil {
		return fail(err)
	}
	type bagResult struct {
		Dir          string `json:"dir"`
		Trajectories int    `json:"trajectories"`
		Description  string `json:"data_description"`
		Archive      string `json:"archive,omitempty"`
	}
	var made []bagResult
	var findings []finding.Finding
	for _, b := range bags {
		r := bagResult{Dir: b.Dir, Trajectories: b.Trajectories, Description: filepath.Join(b.Dir, schema.PayloadDir, "README.md")}
		if o.archive != "" && len(bags) == 1 {
			r.Archive = b.Dir + "." + o.archive
			if err := pack.WriteArchive(b.Dir, r.Archive, o.archive, o.force); err != nil {
				return &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
			}
		}
		made = append(made, r)
		findings = append(findings, pack.CheckLimits(b.Dir, lim)...)
	}
	if o.json {
		return printEnvelope(g, "pack", findings, map[string]any{"bags": made, "audit_verdict": auditVerdict})
	}
	for _, f := range findings {
		fmt.Fprintf(g.stderr, "trajvault: pack: %s\n", f)
	}
	for i, r := range made {
		if len(made) > 1 {
			fmt.Fprintf(g.stdout, "bundle %d of %d: %s (%s)\n", i+1, len(made), r.Dir, plural(r.Trajectories, "trajectory"))
			continue
		}
		fmt.Fprintf(g.stdout, "bundle: %s (%s; BagIt 1.0, %s)\nabout:  %s (data description)\n", r.Dir, plural(r.Trajectories, "trajectory"), strings.Join(bo.Algorithms, ", "), r.Description)
		if r.Archive != "" {
			fmt.Fprintf(g.stdout, "upload: %s\n", r.Archive)
		}
	}
	if o.gather {
		fmt.Fprintf(g.stdout, "shards: %s (no longer needed: the bundle has the files)\n", shards)
	}
	return nil
}

// packConvert scans and converts trajs into a new staging folder of the
// bundle: in worker processes with --jobs above 1 (each scans and
// converts its trajectories, and its reply carries the scan report: every
// log is read by one scan), else in process. All or nothing: refused
// trajectories are printed and nothing is kept.
func packConvert(ctx context.Context, g *globals, o packOptions, dir string, trajs []*ingest.Trajectory, opt ingest.Options, copt ingest.ConvertOptions) (string, []pack.Converted, error) {
	var reps []*ingest.TrajReport
	if o.jobs <= 1 || len(trajs) <= 1 {
		var err error
		opt.SpoolDir = ingest.SpoolDirFor(filepath.Clean(o.out)) // one parse: ConvertAll replays the scan
		if reps, err = scanEnsemble(ctx, g, "pack", trajs, opt, o.jobs, o.dropPartial, o.json); err != nil {
			return "", nil, err
		}
	}
	tmp, err := pack.NewStaging(filepath.Clean(o.out)) // a fresh hidden name; nothing of the user's is removed
	if err != nil {
		for _, r := range reps {
			r.Discard()
		}
		return "", nil, &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
	}
	trajDir := filepath.Join(tmp, filepath.FromSlash(schema.TrajectoriesDir))
	if reps == nil {
		// Worker processes, as convert --jobs: one HDF5 library each.
		flags := append(slices.Clone(o.workerArgs), "--author="+o.author) // the user's, else the creator
		var refused []convertReply
		reps, refused, err = convertInWorkers(ctx, g, flags, copt.CommandLine, dir, trajDir, trajs, o.jobs)
		if err == nil && len(refused) > 0 {
			os.RemoveAll(tmp)
			if o.json {
				var bad []*ingest.TrajReport
				for _, r := range refused {
					bad = append(bad, r.Report)
				}
				printEnvelopeOK(g, "pack", false, scanFindings(bad), nil) // nothing was made
			} else {
				for _, r := range refused {
					fmt.Fprint(g.stdout, r.ScanText)
				}
			}
			fmt.Fprintf(g.stderr, "trajvault: pack: %d of %s have problems; nothing written\n", len(refused), plural(len(trajs), "trajectory"))
			return "", nil, errFindings
		}
	} else {
		converting := newBar(g, "convert", "trajectories")
		_, err = ingest.ConvertAll(ctx, reps, trajDir, copt, o.jobs, converting)
		converting.Finish()
	}
	if err != nil {
		os.RemoveAll(tmp)
		return "", nil, &exitError{exitUsage, fmt.Errorf("pack: %w", err)}
	}
	conv := make([]pack.Converted, len(reps))
	for i, r := range reps {
		conv[i] = pack.Converted{Report: r, File: schema.TrajectoriesDir + "/" + r.Name + schema.TrajectoryExt}
	}
	return tmp, conv, nil
}

// packCommandLine is the command line pack records in each file's
// provenance: the conversion flags the user set and the ensemble folder.
// Where the files were written (-o, a shard's staging folder) and how
// the work was split (--jobs, --shard) do not change a file, so they are
// left out and the same pack gives the same bytes however it ran.
func packCommandLine(flags []string, dir string) []string {
	return append(append([]string{"trajvault", "pack"}, flags...), dir)
}

// linkOrCopy puts the shard's file src at dst: a hard link where the
// file system allows (the shards folder sits beside the bundle), else a
// copy.
func linkOrCopy(src, dst string) error {
	if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
		return err
	}
	if os.Link(src, dst) == nil {
		return nil
	}
	return pack.CopyTrajectory(src, dst)
}

// auditAccepted reports whether an audit verdict passes --require-audit
// (empty: anything passes). A verdict the data cannot give (unknown) is
// accepted only with warn.
func auditAccepted(v audit.Verdict, require string) bool {
	switch require {
	case "ok":
		return v == audit.OK || v == audit.NA
	case "warn":
		return v != audit.Fail
	}
	return true
}

package main

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"

	"trajvault/pack"

	"github.com/spf13/cobra"
)

// The slurm command writes (and with --submit submits) a SLURM job array
// that converts an ensemble shard by shard (convert --shard I/N, or
// pack --shard I/N), and a gather job that runs when every shard has
// succeeded (convert --gather, or pack --gather, which makes the bundle).
// Progress shows in the scheduler's own tools; a failed shard is rerun by
// resubmitting the array: done trajectories are skipped by checksum.

func newSlurmCommand(g *globals) *cobra.Command {
	c := &cobra.Command{
		Use:   "slurm",
		Short: "Run a conversion or a pack as a job array on a SLURM cluster",
	}
	c.AddCommand(newSlurmConvertCommand(g), newSlurmPackCommand(g))
	return c
}

// slurmFlags are the scheduler's side of slurm convert and slurm pack.
type slurmFlags struct {
	shards  int
	scripts string
	submit  bool
	sbatch  []string
}

func (o *slurmFlags) AddFlags(c *cobra.Command) {
	c.Flags().IntVar(&o.shards, "shards", 0, "number of array tasks (each converts every N-th trajectory)")
	c.Flags().StringVar(&o.scripts, "scripts", "", "folder for the batch scripts and task logs (default OUT.slurm)")
	c.Flags().BoolVar(&o.submit, "submit", false, "submit the array and the gather job with sbatch")
	c.Flags().StringArrayVar(&o.sbatch, "sbatch", nil, "an option for both jobs' #SBATCH lines, e.g. --sbatch=--partition=short (repeatable)")
}

// slurmJob is what the two scripts run: trajvault VERB with flags, on
// the ensemble root, into out.
type slurmJob struct {
	verb, root, out string
	flags           []string
}

type slurmConvertOptions struct {
	convertOptions
	slurmFlags
}

func newSlurmConvertCommand(g *globals) *cobra.Command {
	var o slurmConvertOptions
	c := &cobra.Command{
		Use:   "convert ENSEMBLE -o OUT --shards N",
		Short: "Write a job array converting an ensemble in N shards, and a gather job",
		Long: `slurm convert writes two batch scripts into --scripts (default OUT.slurm):
convert-array.sbatch, a job array of N tasks each running
"trajvault convert --shard I/N" with the conversion flags given here, and
gather.sbatch, which runs "trajvault convert --gather" once every task has
succeeded. With --submit it submits both (the gather job depends on the
array) and prints their job IDs. Task logs go to the scripts folder.

Shards write into OUT as they finish, each file atomically, with a ledger
(OUT/.trajvault-shards) of the inputs' and output's checksums: submitting
the array again converts only what is missing or changed.

Exit status: 0 success, 2 usage or I/O error (sbatch refused a script).`,
		Example: "  trajvault slurm convert runs -o runs-h5 --shards 16 --recipe recipe.yaml\n  trajvault slurm convert runs -o runs-h5 --shards 16 --submit --sbatch=--partition=short --sbatch=--time=01:00:00",
		Args:    cobra.ExactArgs(1),
		RunE: func(c *cobra.Command, args []string) error {
			if o.out == "" {
				return &exitError{exitUsage, errors.New("slurm convert: name the output folder with -o, e.g. -o runs-h5")}
			}
			return runSlurm(g, o.slurmFlags, slurmJob{verb: "convert", root: args[0], out: o.out, flags: workerFlags(c)})
		},
	}
	o.convertOptions.AddFlags(c)
	o.slurmFlags.AddFlags(c)
	return c
}

type slurmPackOptions struct {
	packOptions
	slurmFlags
}

func newSlurmPackCommand(g *globals) *cobra.Command {
	var o slurmPackOptions
	c := &cobra.Command{
		Use:   "pack ENSEMBLE -o BUNDLE --shards N --deposit deposit.yaml",
		Short: "Write a job array converting an ensemble in N shards, and a gather job making the bundle",
		Long: `slurm pack writes two batch scripts into --scripts (default BUNDLE.slurm):
pack-array.sbatch, a job array of N tasks each running
"trajvault pack --shard I/N" (which converts every N-th trajectory into
BUNDLE.shards), and gather.sbatch, which runs "trajvault pack --gather"
once every task has succeeded: it audits the files and makes the bag
(data description, RO-Crate, DataCite, manifests, plots) from them
without converting again. Both get the pack flags given here. With
--submit it submits both (the gather job depends on the array) and
prints their job IDs; watch them with squeue (and sacct where the
cluster keeps accounting). Task logs go to the scripts folder.

Every shard keeps a ledger (BUNDLE.shards/.trajvault-shards) of its
inputs', its files' and its settings' checksums: submitting the array
again converts only what is missing or changed. With SOURCE_DATE_EPOCH
set, the bundle's payload is the same, byte for byte, as a local pack's.

Exit status: 0 success, 2 usage or I/O error (sbatch refused a script).`,
		Example: "  trajvault slurm pack runs -o deposit-bag --shards 16 --deposit deposit.yaml --recipe recipe.yaml --submit",
		Args:    cobra.ExactArgs(1),
		RunE: func(c *cobra.Command, args []string) error {
			if o.out == "" {
				return &exitError{exitUsage, errors.New("slurm pack: name the bundle folder with -o, e.g. -o deposit-bag")}
			}
			// A deposit the jobs cannot load fails here, not in every task.
			if _, err := pack.LoadDeposit(o.deposit); err != nil {
				return &exitError{exitUsage, fmt.Errorf("slurm pack: %w", err)}
			}
			// Every pack flag the user set goes to both jobs (the shards
			// use the conversion flags, the gather the bundle's).
			drop := []string{"jobs", "json", "output", "shard", "gather", "shards", "scripts", "submit", "sbatch"}
			args2 := workerArgs(c, nil, drop)
			return runSlurm(g, o.slurmFlags, slurmJob{verb: "pack", root: args[0], out: o.out, flags: args2[1 : len(args2)-1]})
		},
	}
	o.packOptions.AddFlags(c)
	o.slurmFlags.AddFlags(c)
	return c
}

func runSlurm(g *globals, o slurmFlags, job slurmJob) error {
	verb := "slurm " + job.verb
	if o.shards < 1 {
		return &exitError{exitUsage, fmt.Errorf("%s: give the number of array tasks, e.g. --shards 16", verb)}
	}
	for _, s := range o.sbatch {
		if !strings.HasPrefix(s, "-") || strings.ContainsAny(s, "\n\r") {
			return &exitError{exitUsage, fmt.Errorf("%s: --sbatch %q: give one sbatch option, e.g. --sbatch=--partition=short", verb, s)}
		}
	}
	exe, err := os.Executable()
	if err != nil {
		return fmt.Errorf("%s: cannot find this program: %w", verb, err)
	}
	abs := func(p string) string {
		a, err := filepath.Abs(p)
		if err != nil {
			return p
		}
		return a
	}
	root, out := abs(job.root), abs(job.out)
	dir := o.scripts
	if dir == "" {
		dir = out + ".slurm"
	}
	dir = abs(dir)
	wd, _ := os.Getwd()
	for _, p := range []string{dir, wd} {
		// #SBATCH lines are not read by a shell: no quoting there.
		if strings.ContainsAny(p, " \t\n'\"\\") {
			return &exitError{exitUsage, fmt.Errorf("%s: %q: #SBATCH lines cannot hold spaces or quotes in paths; choose --scripts and a working folder without them", verb, p)}
		}
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return &exitError{exitUsage, err}
	}
	flags := quoteWords(job.flags)
	var extra strings.Builder
	if wd != "" {
		// Relative paths among the flags (a recipe) mean what they mean here.
		fmt.Fprintf(&extra, "#SBATCH --chdir=%s\n", wd)
	}
	for _, s := range o.sbatch {
		fmt.Fprintf(&extra, "#SBATCH %s\n", s)
	}
	array := fmt.Sprintf(`#!/bin/bash
#SBATCH --job-name=trajvault-%s
#SBATCH --array=0-%d
#SBATCH --ntasks=1
#SBATCH --output=%s
%s# Written by trajvault %s: shard $SLURM_ARRAY_TASK_ID of %d.
set -euo pipefail
exec %s %s --shard "$SLURM_ARRAY_TASK_ID/%d" --jobs 1 %s -o %s %s
`, job.verb, o.shards-1, filepath.Join(dir, job.verb+"-%A_%a.log"), extra.String(), verb, o.shards,
		shellQuote(exe), job.verb, o.shards, flags, shellQuote(out), shellQuote(root))
	gather := fmt.Sprintf(`#!/bin/bash
#SBATCH --job-name=trajvault-gather
#SBATCH --ntasks=1
#SBATCH --output=%s
%s# Written by trajvault %s: runs after every shard succeeded.
set -euo pipefail
exec %s %s --gather %s -o %s %s
`, filepath.Join(dir, "gather-%j.log"), extra.String(), verb,
		shellQuote(exe), job.verb, flags, shellQuote(out), shellQuote(root))
	arrayPath, gatherPath := filepath.Join(dir, job.verb+"-array.sbatch"), filepath.Join(dir, "gather.sbatch")
	for p, body := range map[string]string{arrayPath: array, gatherPath: gather} {
		if err := replaceFile(p, []byte(body)); err != nil {
			return &exitError{exitUsage, err}
		}
	}
	if !o.submit {
		fmt.Fprintf(g.stdout, "wrote %s\nwrote %s\nsubmit: sbatch %s, then sbatch --dependency=afterok:ID --kill-on-invalid-dep=yes %s\n",
			arrayPath, gatherPath, shellQuote(arrayPath), shellQuote(gatherPath))
		return nil
	}
	arrayID, err := sbatch(arrayPath)
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("%s: %w", verb, err)}
	}
	gatherID, err := sbatch("--dependency=afterok:"+arrayID, "--kill-on-invalid-dep=yes", gatherPath)
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("%s: array %s submitted; gather: %w", verb, arrayID, err)}
	}
	fmt.Fprintf(g.stdout, "submitted job array %s (%d tasks) and gather job %s\nwatch: squeue -j %s,%s; logs in %s\n",
		arrayID, o.shards, gatherID, arrayID, gatherID, dir)
	return nil
}

// sbatch submits a script and returns the job ID (--parsable prints
// "ID" or "ID;cluster").
func sbatch(args ...string) (string, error) {
	cmd := exec.Command("sbatch", append([]string{"--parsable"}, args...)...)
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	if err := cmd.Run(); err != nil {
		return "", fmt.Errorf("sbatch %s: %v: %s", args[len(args)-1], err, strings.TrimSpace(errb.String()))
	}
	id, _, _ := strings.Cut(strings.TrimSpace(out.String()), ";")
	if id == "" {
		return "", fmt.Errorf("sbatch %s printed no job ID", args[len(args)-1])
	}
	return id, nil
}

// shellQuote quotes s for a POSIX shell.
func shellQuote(s string) string {
	return "'" + strings.ReplaceAll(s, "'", `'\''`) + "'"
}

func quoteWords(ws []string) string {
	q := make([]string, len(ws))
	for i, w := range ws {
		q[i] = shellQuote(w)
	}
	return strings.Join(q, " ")
}

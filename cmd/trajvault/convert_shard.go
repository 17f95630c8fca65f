package main

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"trajvault/ingest"
)

// Shards split an ensemble conversion (convert --shard, pack --shard)
// into independent units for a cluster scheduler's job array: shard I of
// N takes the trajectories at positions I, I+N, I+2N, ... of the
// ensemble (sorted by name). Every shard writes its files into one
// folder (convert: the output folder; pack: BUNDLE.shards beside the
// bundle), each file atomically, and a ledger entry per trajectory
// (sha256 of every input and of the output, the conversion settings and
// the scan report) under FOLDER/.trajvault-shards/. A shard run again
// skips trajectories whose inputs, settings and output still match their
// ledger, so a restarted array redoes only what is missing or changed;
// gathering checks that every trajectory is there and reads the reports
// from the ledger instead of scanning the logs again.

// shardDir is the ledger folder inside the shards' output folder.
const shardDir = ".trajvault-shards"

// shardSpec is "I/N" parsed.
type shardSpec struct{ I, N int }

func parseShard(s string) (shardSpec, error) {
	a, b, ok := strings.Cut(s, "/")
	i, err1 := strconv.Atoi(a)
	n, err2 := strconv.Atoi(b)
	if !ok || err1 != nil || err2 != nil || n < 1 || i < 0 || i >= n {
		return shardSpec{}, fmt.Errorf("--shard %q: give I/N with 0 <= I < N, e.g. --shard 0/8", s)
	}
	return shardSpec{i, n}, nil
}

// ledgerEntry records one converted trajectory.
type ledgerEntry struct {
	Name   string            `json:"name"`
	Inputs map[string]string `json:"inputs"` // path relative to the ensemble -> sha256
	Output string            `json:"output_sha256"`
	Frames int               `json:"frames"`
	// Settings are the conversion flags in force: other settings make
	// other files, so the trajectory is converted again.
	Settings []string `json:"settings"`
	// Report is the scan report (its public part), for a gather that
	// writes the data description without reading the logs again.
	Report *ingest.TrajReport `json:"report"`
}

func fileSHA256(p string) (string, error) {
	f, err := os.Open(p)
	if err != nil {
		return "", err
	}
	defer f.Close()
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return "", err
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

// inputSums are the sha256 sums of a trajectory's inputs, by path
// relative to root.
func inputSums(root string, t *ingest.Trajectory) (map[string]string, error) {
	sums := map[string]string{}
	for _, in := range t.Inputs {
		s, err := fileSHA256(in.Path)
		if err != nil {
			return nil, err
		}
		rel, err := filepath.Rel(root, in.Path)
		if err != nil {
			rel = in.Path
		}
		sums[filepath.ToSlash(rel)] = s
	}
	return sums, nil
}

// readLedger returns t's ledger entry in out when it matches t's inputs
// (sums), the settings and the output file; else nil.
func readLedger(out string, t *ingest.Trajectory, sums map[string]string, settings []string) *ledgerEntry {
	b, err := os.ReadFile(filepath.Join(out, shardDir, t.Name+".json"))
	if err != nil {
		return nil
	}
	var e ledgerEntry
	if json.Unmarshal(b, &e) != nil || e.Name != t.Name || e.Report == nil || len(e.Inputs) != len(sums) || !slices.Equal(e.Settings, settings) {
		return nil
	}
	for k, v := range sums {
		if e.Inputs[k] != v {
			return nil
		}
	}
	if s, err := fileSHA256(filepath.Join(out, t.Name+".h5")); err != nil || s != e.Output {
		return nil
	}
	return &e
}

// shardRun is the work of one shard: convert --shard and pack --shard.
type shardRun struct {
	verb        string // convert or pack, for messages
	spec        string // I/N as given
	root        string // the ensemble folder
	out         string // folder of the files and the ledger
	trajs       []*ingest.Trajectory
	opt         ingest.Options
	copt        ingest.ConvertOptions
	settings    []string // the conversion flags, recorded in the ledger
	dropPartial bool
}

// runShard converts the trajectories of one shard into r.out, skipping
// those its ledger says are done.
func runShard(ctx context.Context, g *globals, r shardRun) error {
	sh, err := parseShard(r.spec)
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("%s: %w", r.verb, err)}
	}
	if err := os.MkdirAll(filepath.Join(r.out, shardDir), 0o755); err != nil {
		return &exitError{exitUsage, err}
	}
	done, skipped, bad := 0, 0, 0
	for k, t := range r.trajs {
		if k%sh.N != sh.I {
			continue
		}
		if err := ctx.Err(); err != nil {
			return err
		}
		sums, err := inputSums(r.root, t)
		if err != nil {
			return &exitError{exitUsage, fmt.Errorf("%s: %s: %w", r.verb, t.Name, err)}
		}
		if readLedger(r.out, t, sums, r.settings) != nil {
			skipped++
			continue
		}
		opt := r.opt
		opt.SpoolDir, opt.DropPartial = r.out, r.dropPartial // one parse: Convert replays the scan
		rep, err := ingest.Scan(ctx, t, opt)
		if err != nil {
			return &exitError{exitUsage, fmt.Errorf("%s: %s: %w", r.verb, t.Name, err)}
		}
		if rep.Refusal(r.dropPartial) != nil {
			rep.Discard()
			printScan(g, rep)
			bad++
			continue
		}
		dst := filepath.Join(r.out, t.Name+".h5")
		if _, err := os.Stat(dst); err == nil {
			// A file of an earlier shard run whose inputs, settings or
			// bytes changed since is ours to replace (it has a ledger
			// entry); anything else is not.
			if _, err := os.Stat(filepath.Join(r.out, shardDir, t.Name+".json")); err != nil {
				rep.Discard()
				return &exitError{exitUsage, fmt.Errorf("%s: %s exists and no shard wrote it; trajvault never overwrites outputs", r.verb, dst)}
			}
			if err := os.Remove(dst); err != nil {
				rep.Discard()
				return &exitError{exitUsage, err}
			}
		}
		res, err := ingest.Convert(ctx, rep, dst, r.copt)
		if err != nil {
			return &exitError{exitUsage, fmt.Errorf("%s: %s: %w", r.verb, t.Name, err)}
		}
		s, err := fileSHA256(dst)
		if err != nil {
			return &exitError{exitUsage, err}
		}
		b, err := json.MarshalIndent(ledgerEntry{Name: t.Name, Inputs: sums, Output: s, Frames: res.Frames, Settings: r.settings, Report: rep}, "", "  ")
		if err != nil {
			return &exitError{exitUsage, err}
		}
		if err := replaceFile(filepath.Join(r.out, shardDir, t.Name+".json"), b); err != nil {
			return &exitError{exitUsage, err}
		}
		done++
	}
	fmt.Fprintf(g.stdout, "shard %d/%d: %s converted, %d already done, %s refused -> %s/\n",
		sh.I, sh.N, nounCount(done, "trajectory", "trajectories"), skipped, nounCount(bad, "trajectory", "trajectories"), filepath.Clean(r.out))
	if bad > 0 {
		return errFindings
	}
	return nil
}

// gatherLedger returns the ledger entries of every trajectory of the
// ensemble, in the order of trajs, or the names of those no shard has
// converted (or that changed since).
func gatherLedger(root, out string, trajs []*ingest.Trajectory, settings []string) (entries []*ledgerEntry, missing []string, err error) {
	for _, t := range trajs {
		sums, err := inputSums(root, t)
		if err != nil {
			return nil, nil, fmt.Errorf("%s: %w", t.Name, err)
		}
		e := readLedger(out, t, sums, settings)
		if e == nil {
			missing = append(missing, t.Name)
			continue
		}
		entries = append(entries, e)
	}
	return entries, missing, nil
}

// reportMissing says which trajectories the shards have not converted.
func reportMissing(g *globals, verb string, missing []string, total int) error {
	fmt.Fprintf(g.stderr, "trajvault: %s: %d of %d trajectories not converted (or changed since, or converted with other settings): %s; run their shards again\n",
		verb, len(missing), total, strings.Join(missing, ", "))
	return errFindings
}

// convertShard converts the trajectories of one shard into o.out.
func convertShard(ctx context.Context, g *globals, o convertOptions, root string, trajs []*ingest.Trajectory, opt ingest.Options, tol map[string]float64) error {
	return runShard(ctx, g, shardRun{verb: "convert", spec: o.shard, root: root, out: o.out, trajs: trajs,
		opt: opt, copt: o.packOptions(opt, tol), settings: o.workerArgs, dropPartial: o.dropPartial})
}

// gatherShards checks that every trajectory of the ensemble has been
// converted by some shard and is unchanged since (its ledger).
func gatherShards(g *globals, o convertOptions, root string, trajs []*ingest.Trajectory) error {
	entries, missing, err := gatherLedger(root, o.out, trajs, o.workerArgs)
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("convert: %w", err)}
	}
	if len(missing) > 0 {
		return reportMissing(g, "convert", missing, len(trajs))
	}
	frames := 0
	for _, e := range entries {
		frames += e.Frames
	}
	fmt.Fprintf(g.stdout, "%s, %d frames, all converted -> %s/\n", nounCount(len(trajs), "trajectory", "trajectories"), frames, filepath.Clean(o.out))
	return nil
}

// nounCount is "1 trajectory" or "3 trajectories".
func nounCount(n int, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return strconv.Itoa(n) + " " + many
}

// replaceFile writes b to path through a synced temporary file in the
// same folder, renamed over the old one: a reader sees the old entry or
// the new, never a part.
func replaceFile(path string, b []byte) error {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".partial-*")
	if err != nil {
		return err
	}
	defer os.Remove(tmp.Name())
	if _, err := tmp.Write(b); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Close(); err != nil {
		return err
	}
	return os.Rename(tmp.Name(), path)
}

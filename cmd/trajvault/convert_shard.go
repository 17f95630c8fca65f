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
	"strconv"
	"strings"

	"trajvault/ingest"
)

// Shards split an ensemble conversion into independent units for a
// cluster scheduler's job array: shard I of N takes the trajectories at
// positions I, I+N, I+2N, ... of the ensemble (sorted by name). Every
// shard writes its files into the same output folder, each file
// atomically, and a ledger entry per trajectory (sha256 of every input
// and of the output) under OUT/.trajvault-shards/. A shard run again
// skips trajectories whose inputs and output still match their ledger,
// so a restarted array redoes only what is missing or changed; --gather
// checks that every trajectory is there.

// shardDir is the ledger folder inside the output folder.
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

// ledgerDone reports whether t's ledger entry in out matches its inputs
// (sums) and its output file.
func ledgerDone(out string, t *ingest.Trajectory, sums map[string]string) bool {
	b, err := os.ReadFile(filepath.Join(out, shardDir, t.Name+".json"))
	if err != nil {
		return false
	}
	var e ledgerEntry
	if json.Unmarshal(b, &e) != nil || len(e.Inputs) != len(sums) {
		return false
	}
	for k, v := range sums {
		if e.Inputs[k] != v {
			return false
		}
	}
	s, err := fileSHA256(filepath.Join(out, t.Name+".h5"))
	return err == nil && s == e.Output
}

// convertShard converts the trajectories of one shard into o.out.
func convertShard(ctx context.Context, g *globals, o convertOptions, root string, trajs []*ingest.Trajectory, opt ingest.Options, tol map[string]float64) error {
	sh, err := parseShard(o.shard)
	if err != nil {
		return &exitError{exitUsage, err}
	}
	if err := os.MkdirAll(filepath.Join(o.out, shardDir), 0o755); err != nil {
		return &exitError{exitUsage, err}
	}
	copt := o.packOptions(opt, tol)
	done, skipped, bad := 0, 0, 0
	for k, t := range trajs {
		if k%sh.N != sh.I {
			continue
		}
		if err := ctx.Err(); err != nil {
			return err
		}
		sums, err := inputSums(root, t)
		if err != nil {
			return &exitError{exitUsage, fmt.Errorf("convert: %s: %w", t.Name, err)}
		}
		if ledgerDone(o.out, t, sums) {
			skipped++
			continue
		}
		rep, err := ingest.Scan(ctx, t, opt)
		if err != nil {
			return &exitError{exitUsage, fmt.Errorf("convert: %s: %w", t.Name, err)}
		}
		if rep.Refusal(o.dropPartial) != nil {
			printScan(g, rep)
			bad++
			continue
		}
		dst := filepath.Join(o.out, t.Name+".h5")
		if _, err := os.Stat(dst); err == nil {
			// A file of an earlier shard run whose inputs changed since is
			// ours to replace (it has a ledger entry); anything else is not.
			if _, err := os.Stat(filepath.Join(o.out, shardDir, t.Name+".json")); err != nil {
				return &exitError{exitUsage, fmt.Errorf("convert: %s exists and no shard wrote it; trajvault never overwrites outputs", dst)}
			}
			if err := os.Remove(dst); err != nil {
				return &exitError{exitUsage, err}
			}
		}
		res, err := ingest.Convert(ctx, rep, dst, copt)
		if err != nil {
			return &exitError{exitUsage, fmt.Errorf("convert: %s: %w", t.Name, err)}
		}
		s, err := fileSHA256(dst)
		if err != nil {
			return &exitError{exitUsage, err}
		}
		b, _ := json.MarshalIndent(ledgerEntry{Name: t.Name, Inputs: sums, Output: s, Frames: res.Frames}, "", "  ")
		if err := replaceFile(filepath.Join(o.out, shardDir, t.Name+".json"), b); err != nil {
			return &exitError{exitUsage, err}
		}
		done++
	}
	fmt.Fprintf(g.stdout, "shard %d/%d: %s converted, %d already done, %s refused -> %s/\n",
		sh.I, sh.N, nounCount(done, "trajectory", "trajectories"), skipped, nounCount(bad, "trajectory", "trajectories"), filepath.Clean(o.out))
	if bad > 0 {
		return errFindings
	}
	return nil
}

// gatherShards checks that every trajectory of the ensemble has been
// converted by some shard and is unchanged since (its ledger).
func gatherShards(g *globals, o convertOptions, root string, trajs []*ingest.Trajectory) error {
	var missing []string
	frames := 0
	for _, t := range trajs {
		sums, err := inputSums(root, t)
		if err != nil {
			return &exitError{exitUsage, fmt.Errorf("convert: %s: %w", t.Name, err)}
		}
		if !ledgerDone(o.out, t, sums) {
			missing = append(missing, t.Name)
			continue
		}
		var e ledgerEntry
		b, _ := os.ReadFile(filepath.Join(o.out, shardDir, t.Name+".json"))
		json.Unmarshal(b, &e)
		frames += e.Frames
	}
	if len(missing) > 0 {
		fmt.Fprintf(g.stderr, "trajvault: convert: %d of %d trajectories not converted (or changed since): %s; run their shards again\n",
			len(missing), len(trajs), strings.Join(missing, ", "))
		return errFindings
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

package ingest

import (
	"context"
	"path/filepath"

	"golang.org/x/sync/errgroup"

	"trajvault/internal/progress"
)

// ScanAll scans every trajectory, jobs at a time (jobs < 1 means one),
// and returns the reports in the order of trajs. Problems in the logs
// are findings in the reports; the only errors are ctx's end and the
// first error of any scan, which stops the others. done counts the
// trajectories scanned (nil: not counted).
func ScanAll(ctx context.Context, trajs []*Trajectory, opt Options, jobs int, done progress.Counter) ([]*TrajReport, error) {
	done = progress.Or(done)
	done.SetTotal(int64(len(trajs)))
	reps := make([]*TrajReport, len(trajs))
	g, gctx := errgroup.WithContext(ctx)
	g.SetLimit(max(jobs, 1))
	for i, t := range trajs {
		g.Go(func() error {
			r, err := Scan(gctx, t, opt)
			reps[i] = r
			done.Add(1)
			return err
		})
	}
	if err := g.Wait(); err != nil {
		for _, r := range reps {
			r.Discard() // spools (Options.SpoolDir) of scans that ended
		}
		return nil, err
	}
	return reps, nil
}

// ConvertAll converts every scanned trajectory into dir/<name>.h5, jobs
// at a time (jobs < 1 means one; HDF5 calls are serialised by the HDF5
// layer, parsing runs in parallel). The first error cancels the other
// conversions, whose partial files are removed; files already finished
// stay in dir, which the caller owns (convert and pack write into a
// temporary folder and rename it only on success). done counts the
// trajectories converted (nil: not counted).
func ConvertAll(ctx context.Context, reps []*TrajReport, dir string, opt ConvertOptions, jobs int, done progress.Counter) ([]*Result, error) {
	done = progress.Or(done)
	done.SetTotal(int64(len(reps)))
	results := make([]*Result, len(reps))
	// Spools of trajectories not converted (an error stopped the run)
	// go too; Convert removes its own.
	defer func() {
		for _, r := range reps {
			r.Discard()
		}
	}()
	g, gctx := errgroup.WithContext(ctx)
	g.SetLimit(max(jobs, 1))
	for i, r := range reps {
		g.Go(func() error {
			if err := gctx.Err(); err != nil {
				return err
			}
			res, err := Convert(gctx, r, filepath.Join(dir, r.Name+".h5"), opt)
			results[i] = res
			done.Add(1)
			return err
		})
	}
	if err := g.Wait(); err != nil {
		return nil, err
	}
	return results, nil
}

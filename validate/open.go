package validate

import (
	"errors"
	"fmt"

	"trajvault/internal/finding"
	"trajvault/internal/h5"
	"trajvault/internal/isolate"
	"trajvault/schema"
)

// OpenCodes are the codes of reading limits (V42-V44) and of the worker
// process that reads each untrusted file (X1-X3); layout.md documents
// them (TestOpenCodesDocumented).
//
//	V42 a declared size exceeds the read budget; nothing was allocated
//	V43 data outside the file (external link, storage, virtual source)
//	    was refused, never opened
//	V44 a dataset declares far more data than the file stores (unwritten
//	    fill values); its values are not scanned
//	X1  the worker reading the file crashed (signal or fatal error)
//	X2  the worker reached the time limit
//	X3  the worker reached the memory limit
var OpenCodes = []string{"V42", "V43", "V44", "X1", "X2", "X3"}

// maxStoredRatio is the largest ratio of declared (uncompressed) to
// stored bytes taken for real data. Deflate cannot exceed about 1032:1
// (RFC 1951: a 258-byte match costs at least 2 bits); scale-offset on
// constant values and the per-chunk index still leave every chunk some
// bytes, so 10^5 is far above what written data reaches (the writer's
// most compressible dataset, a constant active state, stores at about
// 120:1). Above it the dataset is mostly unwritten fill values.
const maxStoredRatio = 100_000

// unwritten reports (V44) a dataset that declares more than maxStoredRatio
// times the bytes the file stores for it, and tells the caller not to
// scan it: a flipped bit in a dimension turns 51 frames into 2^40, whose
// scan through fill values would run for days (issue 12, found by
// TestValidateMutants).
func (c *checker) unwritten(path string, info h5.DatasetInfo) bool {
	logical := info.LogicalBytes()
	if info.Layout != "chunked" || logical/maxStoredRatio <= max(info.StorageBytes, 1<<20/maxStoredRatio) {
		return false
	}
	c.errorf("V44", path, "declares shape %v (%d bytes) but the file stores %d bytes for it: nearly all of it was never written (fill values); values not checked: trim the dataset to the frames written", info.Shape.Dims, logical, info.StorageBytes)
	return true
}

// openFile opens path read-only through the checked HDF5 layer with the
// read budget and external-data policy of opt.
func openFile(path string, opt Options) (*h5.File, error) {
	return h5.OpenWith(path, h5.OpenOptions{MaxReadBytes: opt.MaxReadBytes, AllowExternalDir: opt.AllowExternalDir})
}

// refine gives a read failure its own code: a finding reported under a
// generic code (V33, "cannot read") whose cause is the read budget or a
// refused reference outside the file is V42 or V43, so a user can tell
// "too large for the budget, raise it" and "points outside" from damage.
func refine(code string, args []any) string {
	for _, a := range args {
		err, ok := a.(error)
		if !ok {
			continue
		}
		switch {
		case errors.Is(err, h5.ErrTooLarge):
			return "V42"
		case errors.Is(err, h5.ErrOutside):
			return "V43"
		}
	}
	return code
}

// Isolated turns a worker that did not finish normally into a report for
// the file (or bundle) it was reading: one error finding, X1 (crash), X2
// (time limit) or X3 (memory limit), so that the run can go on with the
// next file. It returns nil for a worker that finished (isolate.Done).
func Isolated(path, toolVersion string, res *isolate.Result) *Report {
	var code, what string
	switch res.Outcome {
	case isolate.Done:
		return nil
	case isolate.TimedOut:
		code, what = "X2", "reading it took too long; raise --time-limit if the file is large, else treat it as hostile"
	case isolate.OutOfMemory:
		code, what = "X3", "reading it needed more memory than allowed; raise --max-memory if the file is large, else treat it as hostile"
	default:
		code, what = "X1", "reading it crashed the reader; the file is damaged or hostile (report it if it is not)"
	}
	rep := &Report{Tool: Tool{Name: "trajvault", Version: toolVersion}, File: path, LayoutVersion: schema.Current().Version}
	rep.Findings = []finding.Finding{{
		// Path "/": the whole file (the HDF5 root), or the whole bundle.
		Code: code, Severity: finding.Error, Location: finding.Location{File: path, Path: "/"},
		Message: fmt.Sprintf("worker %s; %s", res.Summary(), what),
	}}
	rep.finish()
	return rep
}

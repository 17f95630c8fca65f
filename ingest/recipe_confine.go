package ingest

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
)

// ErrOutsideInput is the cause of every refusal of a file or folder that
// a recipe (or a folder walk) names outside the input folder, or that is
// not a regular file or folder (a FIFO would block the reader for good, a
// device could be read without end). Like archive/tar's ErrInsecurePath,
// the name is refused before anything is opened (issue 12, item 5).
var ErrOutsideInput = errors.New("outside the input folder")

// checkPattern refuses a recipe file pattern that could leave the folder
// it is matched in: an absolute path, a ".." element, or a backslash
// (which Glob on another system could read as a separator). field names
// the recipe entry, for the message.
func checkPattern(field, pattern string) error {
	switch {
	case pattern == "":
		return nil
	case filepath.IsAbs(pattern) || strings.HasPrefix(pattern, "/") || strings.HasPrefix(pattern, `\`):
		return fmt.Errorf("%s %q is an absolute path: recipe names are relative to the trajectory folder, e.g. geom.xyz: %w", field, pattern, ErrOutsideInput)
	case strings.Contains(pattern, `\`):
		return fmt.Errorf("%s %q contains a backslash: separate folders with /, e.g. run/geom.xyz", field, pattern)
	}
	for _, el := range strings.Split(pattern, "/") {
		if el == ".." {
			return fmt.Errorf("%s %q has a \"..\" element: recipe names stay inside the input folder; copy the file in instead: %w", field, pattern, ErrOutsideInput)
		}
	}
	return nil
}

// checkPatterns applies checkPattern to every file pattern of the recipe.
func (r *Recipe) checkPatterns() error {
	if err := checkPattern("trajectories", r.Trajectories); err != nil {
		return err
	}
	if r.Geometry != nil {
		if err := checkPattern("geometry file", r.Geometry.File); err != nil {
			return err
		}
	}
	for i, t := range r.Tables {
		if err := checkPattern(fmt.Sprintf("tables[%d] file", i), t.File); err != nil {
			return err
		}
	}
	for i, l := range r.Logs {
		if err := checkPattern(fmt.Sprintf("logs[%d] file", i), l.File); err != nil {
			return err
		}
	}
	return nil
}

// confined checks that p, found under the input folder root, stays there
// once symbolic links are resolved and is a regular file (dir false) or a
// folder (dir true). It opens nothing. The message names p and root only:
// never where a link points, nor anything read there.
func confined(root, p string, dir bool) error {
	realRoot, err := filepath.EvalSymlinks(root)
	if err != nil {
		return err
	}
	realRoot, err = filepath.Abs(realRoot)
	if err != nil {
		return err
	}
	real, err := filepath.EvalSymlinks(p)
	if err != nil {
		// The error's own path may be a link's target: keep only the cause.
		var pe *os.PathError
		if errors.As(err, &pe) {
			err = pe.Err
		}
		return fmt.Errorf("%s: cannot resolve (a broken or looping symbolic link?): %w", p, err)
	}
	real, err = filepath.Abs(real)
	if err != nil {
		return err
	}
	rel, err := filepath.Rel(realRoot, real)
	if err != nil || rel == ".." || strings.HasPrefix(rel, ".."+string(filepath.Separator)) {
		return fmt.Errorf("%s is a symbolic link that leads out of the input folder %s; copy the file into the folder instead: %w", p, root, ErrOutsideInput)
	}
	st, err := os.Stat(real)
	if err != nil {
		return err
	}
	switch {
	case dir && st.IsDir(), !dir && st.Mode().IsRegular():
		return nil
	case dir:
		return fmt.Errorf("%s is not a folder: %w", p, ErrOutsideInput)
	}
	return fmt.Errorf("%s is not a regular file (%s): only regular files are read; FIFOs, devices and sockets never are: %w", p, kindOf(st.Mode()), ErrOutsideInput)
}

// kindOf names a file mode's type for a message.
func kindOf(m os.FileMode) string {
	switch {
	case m&os.ModeNamedPipe != 0:
		return "a FIFO"
	case m&os.ModeSocket != 0:
		return "a socket"
	case m&os.ModeDevice != 0:
		return "a device"
	case m.IsDir():
		return "a folder"
	}
	return "a special file"
}

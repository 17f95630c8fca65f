// Package outdir makes the temporary folder in which an output folder is
// built before it is renamed into place: hidden, uniquely named, beside
// the final name, so that no folder of the user's (such as NAME.partial)
// is ever reused or deleted, and the rename stays on one file system.
package outdir

import (
	"os"
	"path/filepath"
)

// Temp makes a new, empty, hidden folder beside final (creating final's
// parent folders when missing), readable like a normal folder (mode
// 0755), with its marker (Mark); leftovers of killed runs in that folder
// are removed first (Clean). The caller owns it: it renames it to final
// when done, or removes it.
func Temp(final string) (string, error) {
	if err := os.MkdirAll(filepath.Dir(final), 0o755); err != nil {
		return "", err
	}
	Clean(filepath.Dir(final))
	d, err := os.MkdirTemp(filepath.Dir(final), "."+filepath.Base(final)+".partial-*")
	if err != nil {
		return "", err
	}
	if err := os.Chmod(d, 0o755); err != nil {
		os.Remove(d)
		return "", err
	}
	if err := Mark(d); err != nil {
		os.Remove(d)
		return "", err
	}
	return d, nil
}

package validate

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"time"

	"trajvault/internal/bagit"
	"trajvault/internal/finding"
	"trajvault/internal/h5"
	"trajvault/schema"
)

// handBag writes a bag folder by hand from RFC 8493 (sec. 2.1: bagit.txt,
// data/, manifest-sha256.txt with "<hex> <path>" lines), sharing no code
// with the bag writer.
func handBag(t *testing.T, payload map[string][]byte) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "bag")
	var lines []string
	for name, b := range payload {
		p := filepath.Join(dir, filepath.FromSlash(name))
		mustDo(t, os.MkdirAll(filepath.Dir(p), 0o755))
		mustDo(t, os.WriteFile(p, b, 0o644))
		sum := sha256.Sum256(b)
		lines = append(lines, hex.EncodeToString(sum[:])+" "+name+"\n")
	}
	sort.Strings(lines)
	mustDo(t, os.WriteFile(filepath.Join(dir, "bagit.txt"), []byte("BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n"), 0o644))
	mustDo(t, os.WriteFile(filepath.Join(dir, "manifest-sha256.txt"), []byte(strings.Join(lines, "")), 0o644))
	return dir
}

// TestBundleTrajectoryFindings: a trajectory file inside a bag, in a
// folder and in a .tar.zst archive, is checked from the bytes the bag
// checker read; its findings name the file inside the bag and the HDF5
// path, a file that is not HDF5 is B14, and the JSON report matches the
// findings schema.
func TestBundleTrajectoryFindings(t *testing.T) {
	bad := base(t)
	f, err := h5.OpenRW(bad)
	mustDo(t, err)
	mustDo(t, f.DeleteAttr(pg+"/position/value", "unit"))
	mustDo(t, f.Close())
	img, err := os.ReadFile(bad)
	mustDo(t, err)
	const badName, junkName = "data/trajectories/bad.h5", "data/trajectories/junk.h5"
	dir := handBag(t, map[string][]byte{badName: img, junkName: []byte("3\nwater\nO 0 0 0\n")})
	arch := filepath.Join(t.TempDir(), "bag.tar.zst")
	out, err := os.Create(arch)
	mustDo(t, err)
	mustDo(t, bagit.WriteTarZst(dir, out, time.Unix(0, 0)))
	mustDo(t, out.Close())
	sch, err := schema.FindingsSchema()
	mustDo(t, err)
	for _, path := range []string{dir, arch} {
		t.Run(filepath.Base(path), func(t *testing.T) {
			rep, err := Bundle(path, BundleOptions{})
			mustDo(t, err)
			want := map[string]bool{
				fmt.Sprint("V20 ", badName, " ", pg+"/position/value"): false,
				fmt.Sprint("B14 ", "", " ", junkName):                  false,
			}
			for _, fd := range rep.Findings {
				k := fmt.Sprint(fd.Code, " ", fd.File, " ", fd.Path)
				if _, ok := want[k]; ok && fd.Severity == finding.Error {
					want[k] = true
				}
				if fd.Code == "B7" {
					t.Errorf("checksum finding on an untouched bag: %v", fd)
				}
			}
			for k, seen := range want {
				if !seen {
					t.Errorf("no error %s; got:", k)
					for _, fd := range rep.Findings {
						t.Log(fd)
					}
				}
			}
			raw, _ := json.Marshal(rep)
			var doc any
			json.Unmarshal(raw, &doc)
			if err := sch.Validate(doc); err != nil {
				t.Errorf("bundle report does not match findings.schema.json: %v", err)
			}
		})
	}
}

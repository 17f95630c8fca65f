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

// archives writes the bag folder dir as a .tar.zst and a .zip.
func archives(t *testing.T, dir string) []string {
	t.Helper()
	var out []string
	for _, ext := range []string{".tar.zst", ".zip"} {
		p := filepath.Join(t.TempDir(), "bag"+ext)
		f, err := os.Create(p)
		mustDo(t, err)
		if ext == ".zip" {
			mustDo(t, bagit.WriteZip(dir, f, time.Unix(0, 0)))
		} else {
			mustDo(t, bagit.WriteTarZst(dir, f, time.Unix(0, 0)))
		}
		mustDo(t, f.Close())
		out = append(out, p)
	}
	return out
}

// TestArchiveMembersSpooled (issue 14: validating an archive held each
// trajectory file in memory): a trajectory member of a .tar.zst or .zip
// is checked from a file in a private folder under the temporary
// folder, byte for byte the member, never from memory; the folder is
// gone when Bundle returns; a member that does not fit (the limit, or
// the free space) is B15 and nothing is written for it.
func TestArchiveMembersSpooled(t *testing.T) {
	img, err := os.ReadFile(base(t))
	mustDo(t, err)
	const name = "data/trajectories/run.h5"
	dir := handBag(t, map[string][]byte{name: img})
	for _, arch := range archives(t, dir) {
		t.Run(filepath.Base(arch), func(t *testing.T) {
			tmp := t.TempDir()
			t.Setenv("TMPDIR", tmp) // os.TempDir, and so the spool, follow it
			seen := 0
			member := func(n string, b []byte, p string) []finding.Finding {
				seen++
				if b != nil || p == "" {
					t.Errorf("%s: given %d bytes in memory and path %q, want a file", n, len(b), p)
					return nil
				}
				if rel, err := filepath.Rel(tmp, p); err != nil || strings.HasPrefix(rel, "..") || filepath.Dir(rel) == "." {
					t.Errorf("%s: read from %s, not from a folder of its own under %s", n, p, tmp)
				}
				if st, err := os.Stat(filepath.Dir(p)); err != nil || st.Mode().Perm() != 0o700 {
					t.Errorf("%s: the temporary folder is not private: %v %v", n, st.Mode(), err)
				}
				got, err := os.ReadFile(p)
				if err != nil || string(got) != string(img) {
					t.Errorf("%s: the temporary file is not the member (%d of %d bytes, %v)", n, len(got), len(img), err)
				}
				return Member(n, nil, p, "")
			}
			rep, err := Bundle(arch, BundleOptions{Member: member})
			mustDo(t, err)
			if seen != 1 {
				t.Errorf("%d trajectory files checked, want 1", seen)
			}
			for _, f := range rep.Findings {
				if f.Severity == finding.Error && f.Code[0] != 'M' { // the hand-made bag has no metadata
					t.Errorf("finding on a valid member: %v", f)
				}
			}
			left, _ := os.ReadDir(tmp)
			if len(left) != 0 {
				t.Errorf("left in the temporary folder: %v", left)
			}

			// Too large for the limit, then for the free space: B15,
			// and the member's checker never runs.
			for _, tc := range []struct {
				name string
				max  int64
				free int64
			}{
				{"limit", int64(len(img)) - 1, 1 << 40},
				{"free space", 0, int64(len(img)) - 1},
			} {
				saved := freeBytes
				freeBytes = func(string) (int64, error) { return tc.free, nil }
				seen = 0
				rep, err := Bundle(arch, BundleOptions{Member: member, MaxMemberBytes: tc.max})
				freeBytes = saved
				mustDo(t, err)
				b15 := 0
				for _, f := range rep.Findings {
					if f.Code == "B15" && f.Path == name && f.Severity == finding.Warning {
						b15++
					}
				}
				if b15 != 1 || seen != 0 {
					t.Errorf("%s: %d B15 findings, member checked %d times; want 1 and 0", tc.name, b15, seen)
				}
				if left, _ := os.ReadDir(tmp); len(left) != 0 {
					t.Errorf("%s: left in the temporary folder: %v", tc.name, left)
				}
			}
		})
	}
}

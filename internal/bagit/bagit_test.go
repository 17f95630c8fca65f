package bagit

import (
	"bufio"
	"context"
	"crypto/sha256"
	"crypto/sha512"
	"encoding/hex"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

func makeBag(t *testing.T) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "bag")
	os.MkdirAll(filepath.Join(dir, "data", "trajectories"), 0o755)
	os.WriteFile(filepath.Join(dir, "data", "README.md"), []byte("# card\n"), 0o644)
	os.WriteFile(filepath.Join(dir, "data", "trajectories", "a.h5"), []byte("not really hdf5 but bytes"), 0o644)
	os.WriteFile(filepath.Join(dir, "data", "odd%name.txt"), []byte("percent"), 0o644)
	var info Info
	info.Add("Contact-Name", "Tarn Valley photophysics group (fictional)")
	info.Add("External-Description", strings.Repeat("a long description ", 10))
	if err := Make(context.Background(), dir, []string{"sha512", "sha256"}, info, nil, 2, time.Date(2026, 12, 2, 0, 0, 0, 0, time.UTC)); err != nil {
		t.Fatal(err)
	}
	return dir
}

// independent checks a bag folder from RFC 8493 alone, sharing no code
// with the package: bagit.txt, every manifest-<alg>.txt line's checksum,
// and that every file under data/ is listed (sections 2.1, 3).
func independent(t *testing.T, dir string) (complete, valid bool) {
	b, err := os.ReadFile(filepath.Join(dir, "bagit.txt"))
	if err != nil || string(b) != "BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n" {
		return false, false
	}
	listed := map[string]bool{}
	valid = true
	complete = true
	for _, alg := range []string{"sha256", "sha512"} {
		f, err := os.Open(filepath.Join(dir, "manifest-"+alg+".txt"))
		if err != nil {
			continue
		}
		sc := bufio.NewScanner(f)
		for sc.Scan() {
			fields := strings.SplitN(sc.Text(), " ", 2)
			p := strings.ReplaceAll(strings.ReplaceAll(strings.ReplaceAll(fields[1], "%0A", "\n"), "%0D", "\r"), "%25", "%")
			if strings.Contains(p, "..") || strings.HasPrefix(p, "/") {
				valid = false
				continue
			}
			listed[p] = true
			data, err := os.ReadFile(filepath.Join(dir, p))
			if err != nil {
				complete = false
				continue
			}
			var sum string
			if alg == "sha256" {
				s := sha256.Sum256(data)
				sum = hex.EncodeToString(s[:])
			} else {
				s := sha512.Sum512(data)
				sum = hex.EncodeToString(s[:])
			}
			if sum != fields[0] {
				valid = false
			}
		}
		f.Close()
	}
	filepath.Walk(filepath.Join(dir, "data"), func(p string, info os.FileInfo, err error) error {
		if err == nil && info.Mode().IsRegular() {
			rel, _ := filepath.Rel(dir, p)
			if !listed[filepath.ToSlash(rel)] {
				complete = false
			}
		}
		return nil
	})
	return complete, valid && complete
}

func check(t *testing.T, path string) *Result {
	t.Helper()
	src, err := Open(path, DefaultLimits)
	if err != nil {
		t.Fatal(err)
	}
	return Check(src, Options{})
}

func TestMadeBagIsValid(t *testing.T) {
	dir := makeBag(t)
	r := check(t, dir)
	if !r.Complete || !r.Valid || len(r.Findings) != 0 {
		t.Errorf("fresh bag: complete %v valid %v %+v", r.Complete, r.Valid, r.Findings)
	}
	if c, v := independent(t, dir); !c || !v {
		t.Errorf("independent checker: complete %v valid %v", c, v)
	}
	if ox := r.Info.Get("Payload-Oxum"); len(ox) != 1 || ox[0] != "39.3" {
		t.Errorf("Payload-Oxum %v", ox)
	}
	// Archives of the same bag check the same way, without unpacking.
	for _, kind := range []string{"tar.zst", "zip"} {
		p := filepath.Join(t.TempDir(), "bag."+kind)
		f, _ := os.Create(p)
		if kind == "zip" {
			WriteZip(dir, f, time.Unix(0, 0))
		} else {
			WriteTarZst(dir, f, time.Unix(0, 0))
		}
		f.Close()
		r := check(t, p)
		if !r.Valid || len(r.Findings) != 0 {
			t.Errorf("%s: valid %v %+v", kind, r.Valid, r.Findings)
		}
	}
}

// TestTamper: each tampering is reported with the right code and path;
// nothing outside the bag is opened (a ../ manifest line names a file that
// exists beside the bag).
func TestTamper(t *testing.T) {
	cases := []struct {
		name   string
		tamper func(dir string)
		code   string
		path   string
	}{
		{"flipped byte", func(d string) {
			p := filepath.Join(d, "data", "trajectories", "a.h5")
			b, _ := os.ReadFile(p)
			b[3] ^= 0x01
			os.WriteFile(p, b, 0o644)
		}, "B7", "data/trajectories/a.h5"},
		{"deleted file", func(d string) { os.Remove(filepath.Join(d, "data", "README.md")) }, "B5", "data/README.md"},
		{"unlisted extra file", func(d string) {
			os.WriteFile(filepath.Join(d, "data", "extra.txt"), []byte("x"), 0o644)
		}, "B6", "data/extra.txt"},
		{"manifest line with ../", func(d string) {
			os.WriteFile(filepath.Join(filepath.Dir(d), "outside.txt"), []byte("secret"), 0o644)
			f, _ := os.OpenFile(filepath.Join(d, "manifest-sha256.txt"), os.O_APPEND|os.O_WRONLY, 0)
			f.WriteString("0000 data/../../outside.txt\n")
			f.Close()
		}, "B4", "manifest-sha256.txt"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := makeBag(t)
			c.tamper(dir)
			r := check(t, dir)
			found := false
			for _, f := range r.Findings {
				if f.Code == c.code && f.Path == c.path {
					found = true
				}
			}
			if !found || r.Valid {
				t.Errorf("want %s at %s and invalid; valid %v, %+v", c.code, c.path, r.Valid, r.Findings)
			}
			if _, v := independent(t, dir); v {
				t.Error("the independent checker accepts the tampered bag")
			}
		})
	}
}

func TestSymlinkNotFollowed(t *testing.T) {
	dir := makeBag(t)
	os.WriteFile(filepath.Join(filepath.Dir(dir), "secret"), []byte("s"), 0o644)
	os.Symlink(filepath.Join(filepath.Dir(dir), "secret"), filepath.Join(dir, "data", "link"))
	r := check(t, dir)
	if r.Valid || !hasCode(r, "B10") {
		t.Errorf("symlink: %+v", r.Findings)
	}
}

func TestSafePath(t *testing.T) {
	for p, bad := range map[string]bool{
		"data/a.h5": false, "../x": true, "data/../../x": true, "/etc/passwd": true, "~/x": true,
		"C:/x": true, `data\x`: true, "data//x": true, "data/./x": true,
	} {
		if got := SafePath(p) != ""; got != bad {
			t.Errorf("SafePath(%q) unsafe=%v, want %v", p, got, bad)
		}
	}
}

func TestInfoFolding(t *testing.T) {
	var i Info
	i.Add("External-Description", strings.Repeat("word ", 40))
	text := i.Format()
	for _, l := range strings.Split(strings.TrimSpace(text), "\n") {
		if len(l) > 79 {
			t.Errorf("line over 79 characters: %q", l)
		}
	}
	back, err := ParseInfo(text)
	if err != nil || strings.TrimSpace(back[0][1]) != strings.TrimSpace(strings.Repeat("word ", 40)) {
		t.Errorf("round trip: %q %v", back, err)
	}
}

// TestArchiveLimits: an archive whose entries exceed the reading limits is
// refused before its content is trusted (decompression bombs, RFC 8493
// sec. 5 on declared sizes).
func TestArchiveLimits(t *testing.T) {
	dir := makeBag(t)
	os.WriteFile(filepath.Join(dir, "data", "big.bin"), make([]byte, 1<<20), 0o644)
	for _, kind := range []string{"tar.zst", "zip"} {
		p := filepath.Join(t.TempDir(), "bag."+kind)
		f, _ := os.Create(p)
		if kind == "zip" {
			WriteZip(dir, f, time.Unix(0, 0))
		} else {
			WriteTarZst(dir, f, time.Unix(0, 0))
		}
		f.Close()
		if st, _ := os.Stat(p); st.Size() > 200<<10 {
			t.Fatalf("%s: the zero megabyte did not compress (%d bytes)", kind, st.Size())
		}
		_, err := Open(p, Limits{MaxEntryBytes: 512 << 10, MaxTotalBytes: 1 << 30, MaxEntries: 100})
		if !errors.Is(err, ErrLimit) {
			t.Errorf("%s: err = %v, want ErrLimit", kind, err)
		}
	}
}

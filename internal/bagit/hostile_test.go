package bagit

import (
	"archive/tar"
	"archive/zip"
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
	"time"

	"github.com/klauspost/compress/zstd"
)

// codes returns the findings of r with code.
func codes(r *Result, code string) []string {
	var out []string
	for _, f := range r.Findings {
		if f.Code == code {
			out = append(out, f.Path+": "+f.Message)
		}
	}
	return out
}

// TestInfoLinear (issue 12, item 4: 200k continuation lines took 43 s):
// bag-info.txt parsing is linear. 400k continuation lines of one label
// must parse in well under a second here (quadratic joining would copy
// about 10^12 bytes) and give back every word.
func TestInfoLinear(t *testing.T) {
	const n = 400_000
	var b strings.Builder
	b.WriteString("External-Description: start\n")
	for i := 0; i < n; i++ {
		b.WriteString("  w\n")
	}
	b.WriteString("Contact-Name: x\n")
	start := time.Now()
	info, err := ParseInfo(b.String())
	d := time.Since(start)
	if err != nil {
		t.Fatal(err)
	}
	if len(info) != 2 || len(info[0][1]) != len("start")+2*n || info[1] != [2]string{"Contact-Name", "x"} {
		t.Fatalf("parsed %d labels, first value %d bytes", len(info), len(info[0][1]))
	}
	t.Logf("%d continuation lines parsed in %v", n, d)
	if d > 2*time.Second {
		t.Errorf("took %v: not linear", d)
	}
}

// TestOversizeTagFiles (issue 12, item 4: a bag-info.txt over 16 MiB was
// silently ignored, Payload-Oxum included): an oversize bag-info.txt or
// bagit.txt is B17, an error.
func TestOversizeTagFiles(t *testing.T) {
	dir := makeBag(t)
	big := "Payload-Oxum: 1.1\nExternal-Description: " + strings.Repeat("x", smallLimit) + "\n"
	os.WriteFile(filepath.Join(dir, "bag-info.txt"), []byte(big), 0o644)
	src, err := Open(dir, DefaultLimits)
	if err != nil {
		t.Fatal(err)
	}
	r := Check(src, Options{})
	if got := codes(r, "B17"); len(got) != 1 || !strings.HasPrefix(got[0], "bag-info.txt: ") || !strings.Contains(got[0], "Payload-Oxum") {
		t.Errorf("B17 findings %q, want one for bag-info.txt naming Payload-Oxum", got)
	}
	os.WriteFile(filepath.Join(dir, "bagit.txt"), []byte(Declaration+strings.Repeat("\n", 5000)), 0o644)
	src, _ = Open(dir, DefaultLimits)
	if got := codes(Check(src, Options{}), "B17"); len(got) != 2 {
		t.Errorf("B17 findings %q, want bagit.txt and bag-info.txt", got)
	}
}

// dupArchive writes the bag folder dir as kind ("zip" or "tar.zst") with
// data/README.md twice: first a forged copy, then the listed one.
func dupArchive(t *testing.T, dir, kind string) string {
	t.Helper()
	files, err := archiveFiles(dir)
	if err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(t.TempDir(), "dup."+kind)
	out, _ := os.Create(p)
	defer out.Close()
	type item struct {
		name string
		body []byte
	}
	var items []item
	for _, f := range files {
		rel, _ := filepath.Rel(filepath.Dir(dir), f)
		b, _ := os.ReadFile(f)
		if strings.HasSuffix(rel, "data/README.md") {
			items = append(items, item{filepath.ToSlash(rel), []byte("# forged\n")})
		}
		items = append(items, item{filepath.ToSlash(rel), b})
	}
	if kind == "zip" {
		zw := zip.NewWriter(out)
		for _, it := range items {
			w, _ := zw.Create(it.name)
			w.Write(it.body)
		}
		if err := zw.Close(); err != nil {
			t.Fatal(err)
		}
		return p
	}
	zw, _ := zstd.NewWriter(out)
	tw := tar.NewWriter(zw)
	for _, it := range items {
		tw.WriteHeader(&tar.Header{Name: it.name, Mode: 0o644, Size: int64(len(it.body)), Typeflag: tar.TypeReg})
		tw.Write(it.body)
	}
	tw.Close()
	zw.Close()
	return p
}

// TestDuplicateEntries (issue 12, item 4: the first copy was never hashed
// and the warning said the names differ "only by case"): two entries of
// one name are B18 naming both, and the forged first copy fails its
// checksum (B7).
func TestDuplicateEntries(t *testing.T) {
	dir := makeBag(t)
	for _, kind := range []string{"zip", "tar.zst"} {
		t.Run(kind, func(t *testing.T) {
			src, err := Open(dupArchive(t, dir, kind), DefaultLimits)
			if err != nil {
				t.Fatal(err)
			}
			r := Check(src, Options{})
			dup := codes(r, "B18")
			if len(dup) != 1 || !strings.HasPrefix(dup[0], "data/README.md: ") || !strings.Contains(dup[0], "entries ") {
				t.Errorf("B18 %q, want one naming data/README.md and both entries", dup)
			}
			if b7 := codes(r, "B7"); len(b7) == 0 || !strings.HasPrefix(b7[0], "data/README.md") {
				t.Errorf("forged first copy not caught: B7 %q", b7)
			}
			if case12 := codes(r, "B12"); len(case12) != 0 {
				t.Errorf("B12 on an exact duplicate: %q", case12)
			}
			if r.Valid {
				t.Error("valid with a forged copy")
			}
		})
	}
}

// TestManifestBoundedByPayload (issue 12, item 4: 10 million duplicate
// manifest lines in a 108 KB archive took 217 s and 6.2 GB): a manifest
// is never read beyond what lines for the bag's files can fill (B17), and
// never past one line per file (B19), in time and memory independent of
// what it claims.
func TestManifestBoundedByPayload(t *testing.T) {
	dir := makeBag(t)
	body, _ := os.ReadFile(filepath.Join(dir, "data", "README.md"))
	sum := sha256.Sum256(body)
	line := hex.EncodeToString(sum[:]) + " data/README.md\n"
	const n = 10_000_000
	files, _ := archiveFiles(dir)
	p := filepath.Join(t.TempDir(), "lines.tar.zst")
	out, _ := os.Create(p)
	zw, _ := zstd.NewWriter(out, zstd.WithEncoderLevel(zstd.SpeedFastest))
	tw := tar.NewWriter(zw)
	for _, f := range files {
		rel, _ := filepath.Rel(filepath.Dir(dir), f)
		rel = filepath.ToSlash(rel)
		if strings.HasSuffix(rel, "/manifest-sha256.txt") {
			tw.WriteHeader(&tar.Header{Name: rel, Mode: 0o644, Size: int64(n * len(line)), Typeflag: tar.TypeReg})
			chunk := bytes.Repeat([]byte(line), 10_000)
			for i := 0; i < n/10_000; i++ {
				tw.Write(chunk)
			}
			continue
		}
		b, _ := os.ReadFile(f)
		tw.WriteHeader(&tar.Header{Name: rel, Mode: 0o644, Size: int64(len(b)), Typeflag: tar.TypeReg})
		tw.Write(b)
	}
	tw.Close()
	zw.Close()
	out.Close()
	st, _ := os.Stat(p)

	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	start := time.Now()
	src, err := Open(p, DefaultLimits)
	if err != nil {
		t.Fatal(err)
	}
	r := Check(src, Options{})
	d := time.Since(start)
	runtime.ReadMemStats(&after)
	alloc := after.TotalAlloc - before.TotalAlloc
	t.Logf("%d manifest lines (%d MB) in a %d KB archive: checked in %v, %d MB allocated", n, n*len(line)>>20, st.Size()>>10, d.Round(time.Millisecond), alloc>>20)
	if got := codes(r, "B17"); len(got) != 1 || !strings.HasPrefix(got[0], "manifest-sha256.txt: ") {
		t.Errorf("B17 %q, want one for manifest-sha256.txt", got)
	}
	if alloc > 256<<20 {
		t.Errorf("allocated %d MB", alloc>>20)
	}
	if d > 30*time.Second {
		t.Errorf("took %v", d)
	}

	// Within the byte bound but with more lines than files: B19, and the
	// parse stops there.
	short := strings.Repeat("0 data/README.md\n", 2000)
	os.WriteFile(filepath.Join(dir, "manifest-md5.txt"), []byte(short), 0o644)
	src, _ = Open(dir, DefaultLimits)
	r = Check(src, Options{})
	if got := codes(r, "B19"); len(got) != 1 || !strings.HasPrefix(got[0], "manifest-md5.txt: ") {
		t.Errorf("B19 %q, want one for manifest-md5.txt", got)
	}
	if b3 := codes(r, "B3"); len(b3) > 50 {
		t.Errorf("%d B3 findings: the parse did not stop", len(b3))
	}
}

package bagit

import (
	"crypto/md5"
	"crypto/sha256"
	"crypto/sha512"
	"encoding/hex"
	"math/rand"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestSumsMatchReference: the chunked, concurrent hashing gives the digests
// of the standard library's one-shot functions (SHA-2 per FIPS 180-4, MD5
// per RFC 1321) at sizes around the chunk boundary and for empty input.
func TestSumsMatchReference(t *testing.T) {
	rng := rand.New(rand.NewSource(3))
	for _, n := range []int{0, 1, hashChunk - 1, hashChunk, hashChunk + 1, 3*hashChunk + 17} {
		b := make([]byte, n)
		rng.Read(b)
		got, size, err := sums(strings.NewReader(string(b)), []string{"md5", "sha256", "sha512"})
		if err != nil || size != int64(n) {
			t.Fatalf("%d bytes: size %d, %v", n, size, err)
		}
		s256, s512, m5 := sha256.Sum256(b), sha512.Sum512(b), md5.Sum(b)
		want := map[string]string{"sha256": hex.EncodeToString(s256[:]), "sha512": hex.EncodeToString(s512[:]), "md5": hex.EncodeToString(m5[:])}
		for a, w := range want {
			if got[a] != w {
				t.Errorf("%d bytes, %s: %s, want %s", n, a, got[a], w)
			}
		}
		one, _, _ := sums(strings.NewReader(string(b)), []string{"sha256"})
		if one["sha256"] != want["sha256"] {
			t.Errorf("%d bytes, sha256 alone: %s", n, one["sha256"])
		}
	}
}

// TestDigestsLimit: a check limited to sha256 computes only sha256 and
// names every manifest it did not verify (B20, Unverified). A payload
// file changed with its sha256 lines rewritten to match passes the limited
// check and fails the full one (RFC 8493 sec. 3: valid means every
// manifest verified), which is why the limit is reported.
func TestDigestsLimit(t *testing.T) {
	dir := makeBag(t)
	file := "data/README.md"
	content := []byte("# cord\n") // same size: Payload-Oxum still holds
	os.WriteFile(filepath.Join(dir, filepath.FromSlash(file)), content, 0o644)
	rewrite := func(manifest, name string, data []byte) {
		p := filepath.Join(dir, manifest)
		b, _ := os.ReadFile(p)
		sum := sha256.Sum256(data)
		var out []string
		for _, l := range strings.Split(strings.TrimRight(string(b), "\n"), "\n") {
			if strings.HasSuffix(l, " "+name) {
				l = hex.EncodeToString(sum[:]) + " " + name
			}
			out = append(out, l)
		}
		os.WriteFile(p, []byte(strings.Join(out, "\n")+"\n"), 0o644)
	}
	rewrite("manifest-sha256.txt", file, content)
	m, _ := os.ReadFile(filepath.Join(dir, "manifest-sha256.txt"))
	rewrite("tagmanifest-sha256.txt", "manifest-sha256.txt", m)

	src, err := Open(dir, DefaultLimits)
	if err != nil {
		t.Fatal(err)
	}
	r := Check(src, Options{Digests: []string{"sha256"}})
	var notes []string
	for _, f := range r.Findings {
		switch f.Code {
		case "B20":
			notes = append(notes, f.Path)
		default:
			t.Errorf("limited check: %+v", f)
		}
	}
	if strings.Join(notes, " ") != "manifest-sha512.txt tagmanifest-sha512.txt" || !r.Unverified || !r.Valid {
		t.Errorf("limited check: B20 at %v, unverified %v, valid %v", notes, r.Unverified, r.Valid)
	}
	full := check(t, dir)
	caught := false
	for _, f := range full.Findings {
		caught = caught || (f.Code == "B7" && f.Path == file)
	}
	if full.Valid || full.Unverified || !caught {
		t.Errorf("full check: valid %v unverified %v, %+v", full.Valid, full.Unverified, full.Findings)
	}
}

package bagit

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"io"
	"io/fs"
	"reflect"
	"sort"
	"strings"
	"testing"
)

// memSource is a bag held in memory, for fuzzing Check without files.
type memSource struct {
	files map[string][]byte
}

func (m *memSource) Name() string { return "mem" }

func (m *memSource) Entries() []Entry {
	var out []Entry
	for n, b := range m.files {
		out = append(out, Entry{Name: n, Size: int64(len(b))})
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Name < out[j].Name })
	return out
}

func (m *memSource) ReadSmall(name string, limit int64) ([]byte, error) {
	b, ok := m.files[name]
	if !ok {
		return nil, fs.ErrNotExist
	}
	return readLimited(bytes.NewReader(b), limit)
}

func (m *memSource) Each(fn func(string, io.Reader) error) error {
	for _, e := range m.Entries() {
		if err := fn(e.Name, bytes.NewReader(m.files[e.Name])); err != nil {
			return err
		}
	}
	return nil
}

// FuzzInfo: ParseInfo never panics, and what it accepts survives Format
// and ParseInfo again with the same labels and the same words (RFC 8493
// sec. 2.2.2: continuation lines fold a value, they do not change it).
func FuzzInfo(f *testing.F) {
	f.Add("Contact-Name: Jane\nExternal-Description: a b\n  c d\n")
	f.Add("Payload-Oxum: 12.3\r\nBag-Count: 1 of 2\n")
	f.Add("\tx\n")
	f.Add("no colon\n")
	f.Add(": empty label\n")
	f.Fuzz(func(t *testing.T, text string) {
		info, err := ParseInfo(text)
		if err != nil {
			return
		}
		back, err := ParseInfo(info.Format())
		if err != nil {
			t.Fatalf("Format gave text ParseInfo refuses: %v\n%q", err, info.Format())
		}
		if len(back) != len(info) {
			t.Fatalf("%d labels, then %d", len(info), len(back))
		}
		for i := range info {
			if back[i][0] != info[i][0] || !reflect.DeepEqual(strings.Fields(back[i][1]), strings.Fields(info[i][1])) {
				t.Fatalf("label %d: %q, then %q", i, info[i], back[i])
			}
		}
	})
}

// FuzzManifest: Check on a bag whose manifest and bag-info are the fuzz
// input never panics, never reports a path it did not list as present,
// and its findings stay bounded by the bag (one per manifest line it may
// read, plus the bag's own files).
func FuzzManifest(f *testing.F) {
	body := []byte("payload\n")
	sum := sha256.Sum256(body)
	good := hex.EncodeToString(sum[:]) + " data/a.txt\n"
	f.Add(good, "Payload-Oxum: 8.1\n")
	f.Add(good+good, "")
	f.Add("00 ../etc/passwd\n"+good, "Payload-Oxum: x\n")
	f.Add("zz data/a.txt\n  \n"+strings.Repeat("0 data/b\n", 40), "  bad\n")
	f.Add(hex.EncodeToString(sum[:])+"  data/%0A.txt\r\n", "")
	f.Fuzz(func(t *testing.T, manifest, info string) {
		src := &memSource{files: map[string][]byte{
			"bagit.txt":           []byte(Declaration),
			"bag-info.txt":        []byte(info),
			"manifest-sha256.txt": []byte(manifest),
			"data/a.txt":          body,
		}}
		r := Check(src, Options{})
		_, maxLines := ManifestLimits(src.Entries(), false)
		if len(r.Findings) > 2*maxLines+len(src.files)+8 {
			t.Fatalf("%d findings for a manifest of at most %d lines read", len(r.Findings), maxLines)
		}
		if r.Valid && !strings.Contains(manifest, hex.EncodeToString(sum[:])) {
			t.Fatalf("valid without the payload's checksum in the manifest")
		}
	})
}

// Package bagit writes and checks BagIt 1.0 bags (RFC 8493): a base
// folder with bagit.txt, payload manifests, bag-info.txt, tag manifests
// and the payload under data/.
//
// The writer is deterministic: manifest lines are sorted by path and
// bag-info labels keep the order given. The checker reads through an
// fs.FS, so a bag in a folder, a zip or a tar.zst archive is checked the
// same way, without unpacking, and it never opens a path outside the bag
// (RFC 8493 sec. 5).
package bagit

import (
	"crypto/md5"
	"crypto/sha256"
	"crypto/sha512"
	"encoding/hex"
	"fmt"
	"hash"
	"io"
	"strings"
	"sync"
)

// Algorithms trajvault writes and checks, by their RFC 8493 names.
var Algorithms = map[string]func() hash.Hash{
	"sha512": sha512.New,
	"sha256": sha256.New,
	"md5":    md5.New, // compatibility only: repositories often display md5
}

// DeclarationFile is the bag declaration's name (RFC 8493 sec. 2.1.1).
const DeclarationFile = "bagit.txt"

// Declaration is the exact content of bagit.txt (RFC 8493 sec. 2.1.1).
const Declaration = "BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n"

// EncodePath percent-encodes a manifest path: only CR, LF and % (RFC 8493
// sec. 2.1.3).
func EncodePath(p string) string {
	r := strings.NewReplacer("%", "%25", "\r", "%0D", "\n", "%0A")
	return r.Replace(p)
}

// DecodePath reverses EncodePath.
func DecodePath(p string) string {
	r := strings.NewReplacer("%0D", "\r", "%0A", "\n", "%0d", "\r", "%0a", "\n", "%25", "%")
	return r.Replace(p)
}

// sums computes several digests of one stream in a single read. With
// more than one algorithm each hash runs on its own goroutine over the
// same chunk, while the next chunk is read (two buffers): sha512 and md5
// cost about three times sha256 with SHA extensions, so on two cores the
// three together take about the time of the slowest rather than the sum.
func sums(r io.Reader, algs []string) (map[string]string, int64, error) {
	hs := make([]hash.Hash, len(algs))
	for i, a := range algs {
		hs[i] = Algorithms[a]()
	}
	n, err := hashAll(r, hs)
	if err != nil {
		return nil, n, err
	}
	out := map[string]string{}
	for i, a := range algs {
		out[a] = hex.EncodeToString(hs[i].Sum(nil))
	}
	return out, n, nil
}

// hashChunk is the read size: large enough that system calls are a small
// part of hashing at a few GB/s.
const hashChunk = 256 << 10

// readerOnly hides a file's WriteTo, which would copy in 32 KiB pieces.
type readerOnly struct{ io.Reader }

func hashAll(r io.Reader, hs []hash.Hash) (int64, error) {
	if len(hs) == 1 {
		return io.CopyBuffer(hs[0], readerOnly{r}, make([]byte, hashChunk))
	}
	var wg sync.WaitGroup
	feeds := make([]chan []byte, len(hs))
	for i := range hs {
		feeds[i] = make(chan []byte, 1)
		go func(h hash.Hash, in <-chan []byte) {
			for b := range in {
				h.Write(b) // hash.Hash.Write never fails
				wg.Done()
			}
		}(hs[i], feeds[i])
	}
	defer func() {
		wg.Wait()
		for _, f := range feeds {
			close(f)
		}
	}()
	// bufs[cur] is filled while the hashes work on bufs[cur^1]; a buffer
	// is refilled only after the round that used it has finished.
	bufs := [2][]byte{make([]byte, hashChunk), make([]byte, hashChunk)}
	cur := 0
	var n int64
	for {
		k, err := io.ReadFull(r, bufs[cur])
		if k > 0 {
			wg.Wait()
			wg.Add(len(hs))
			for _, f := range feeds {
				f <- bufs[cur][:k]
			}
			n += int64(k)
			cur ^= 1
		}
		if err == io.EOF || err == io.ErrUnexpectedEOF {
			return n, nil
		}
		if err != nil {
			return n, err
		}
	}
}

// SafePath reports why a manifest path must not be followed, or "" when
// it is a clean relative path inside the bag (RFC 8493 sec. 5: no
// absolute paths, "..", "~", drive letters or backslashes).
func SafePath(p string) string {
	switch {
	case p == "":
		return "empty path"
	case strings.HasPrefix(p, "/"):
		return "absolute path"
	case strings.Contains(p, "\\"):
		return "backslash in path"
	case strings.HasPrefix(p, "~"):
		return "path starts with ~"
	case len(p) >= 2 && p[1] == ':':
		return "drive letter"
	}
	for _, part := range strings.Split(p, "/") {
		if part == ".." {
			return "path leaves the bag (..)"
		}
		if part == "" || part == "." {
			return "empty or . path component"
		}
	}
	return ""
}

// Info is an ordered bag-info.txt.
type Info [][2]string

// Add appends a label.
func (i *Info) Add(label, value string) { *i = append(*i, [2]string{label, value}) }

// Format writes labels in order, folding long values onto indented
// continuation lines (RFC 8493 sec. 2.2.2).
func (i Info) Format() string {
	var b strings.Builder
	for _, kv := range i {
		line := kv[0] + ": "
		words := strings.Fields(kv[1])
		if len(words) == 0 {
			b.WriteString(line + "\n")
			continue
		}
		cur := line
		for j, w := range words {
			if j > 0 && len(cur)+1+len(w) > 79 {
				b.WriteString(cur + "\n")
				cur = "  " + w
				continue
			}
			if j > 0 {
				cur += " "
			}
			cur += w
		}
		b.WriteString(cur + "\n")
	}
	return b.String()
}

// ParseInfo reads bag-info.txt, joining continuation lines. It takes time
// and memory linear in the text: each value is built in one
// strings.Builder, never by repeated concatenation (issue 12: 200k
// continuation lines took 43 s).
func ParseInfo(text string) (Info, error) {
	var out Info
	var cur strings.Builder
	open := false
	flush := func() {
		if open {
			out[len(out)-1][1] = cur.String()
			cur.Reset()
		}
	}
	n := 0
	for len(text) > 0 {
		n++
		line, rest, _ := strings.Cut(text, "\n")
		text = rest
		line = strings.TrimSuffix(line, "\r")
		if line == "" {
			continue
		}
		if line[0] == ' ' || line[0] == '\t' {
			if !open {
				return nil, fmt.Errorf("bag-info.txt line %d: continuation without a label", n)
			}
			cur.WriteByte(' ')
			cur.WriteString(strings.TrimSpace(line))
			continue
		}
		label, value, ok := strings.Cut(line, ":")
		if !ok {
			flush()
			return nil, fmt.Errorf("bag-info.txt line %d: expected \"Label: value\"", n)
		}
		flush()
		out = append(out, [2]string{strings.TrimSpace(label), ""})
		cur.WriteString(strings.TrimSpace(value))
		open = true
	}
	flush()
	return out, nil
}

// Get returns the values of a label.
func (i Info) Get(label string) []string {
	var v []string
	for _, kv := range i {
		if strings.EqualFold(kv[0], label) {
			v = append(v, kv[1])
		}
	}
	return v
}

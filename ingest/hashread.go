package ingest

import (
	"crypto/sha256"
	"encoding/hex"
	"hash"
	"io"
	"os"

	"trajvault/provenance"
)

// hashedFile is an input file that hashes every byte read through it
// (SHA-256, FIPS 180-4), so that the provenance needs no third read of
// the file (issue 14): the scan reads it, the conversion replays the
// scan's spool, and the hash is of the very bytes the scan read.
type hashedFile struct {
	f   *os.File
	h   hash.Hash
	n   int64
	eof bool // the file was read to its end
}

// openHashed opens path for reading through a hash.
func openHashed(path string) (*hashedFile, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	return &hashedFile{f: f, h: sha256.New()}, nil
}

func (h *hashedFile) Read(p []byte) (int, error) {
	n, err := h.f.Read(p)
	h.h.Write(p[:n])
	h.n += int64(n)
	if err == io.EOF {
		h.eof = true
	}
	return n, err
}

func (h *hashedFile) Close() error { return h.f.Close() }

// sum is the provenance entry of the file (Role left to the caller),
// when it was read to its end; else ok is false (hash it on its own).
func (h *hashedFile) sum(path string) (s provenance.Source, ok bool) {
	if !h.eof {
		return s, false
	}
	return provenance.Source{Path: path, Bytes: h.n, SHA256: hex.EncodeToString(h.h.Sum(nil))}, true
}

// digester is implemented by sources that hash their file as they read
// it (hashedFile); optional, as a reader may read otherwise.
type digester interface {
	digest() (provenance.Source, bool)
}

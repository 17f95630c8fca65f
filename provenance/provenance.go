package provenance

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"io"
	"os"
)

// ConstantSet names the physical constants every unit conversion uses.
const ConstantSet = "CODATA 2018 (Rev. Mod. Phys. 93, 025010 (2021)); SI 2019 exact constants"

// Source is one input file.
type Source struct {
	Path   string `json:"path"`
	Role   string `json:"role"` // geometry, table, log, recipe
	Bytes  int64  `json:"bytes"`
	SHA256 string `json:"sha256"`
}

// Record is the provenance of one converted trajectory. Field order is
// fixed, so the same conversion gives the same JSON apart from times.
type Record struct {
	Tool        string            `json:"tool"`
	ToolVersion string            `json:"tool_version"`
	CommandLine []string          `json:"command_line,omitempty"`
	Started     string            `json:"started"`  // RFC 3339, UTC
	Finished    string            `json:"finished"` // RFC 3339, UTC
	Sources     []Source          `json:"sources"`
	Recipe      string            `json:"recipe,omitempty"` // the recipe text, when one was used
	Units       map[string]string `json:"units"`            // unit of each kind of quantity, as stored (momentum: as read, before p/m)
	Conversions []string          `json:"conversions,omitempty"`
	ConstantSet string            `json:"constant_set"`
	Storage     map[string]string `json:"storage"`
	Dropped     []string          `json:"dropped,omitempty"`
	// NotStored lists what the sources hold that was read but not
	// stored, each with its file and reason.
	NotStored []string `json:"not_stored,omitempty"`
	// Accepted lists physics cross-check findings the user accepted
	// (convert --accept-mismatch), as printed.
	Accepted []string `json:"accepted_mismatches,omitempty"`
}

// JSON encodes the record (map keys sorted by encoding/json).
func (r *Record) JSON() ([]byte, error) { return json.Marshal(r) }

// HashFile streams a file through SHA-256 (FIPS 180-4).
func HashFile(path string) (Source, error) {
	f, err := os.Open(path)
	if err != nil {
		return Source{}, err
	}
	defer f.Close()
	h := sha256.New()
	n, err := io.Copy(h, f)
	if err != nil {
		return Source{}, err
	}
	return Source{Path: path, Bytes: n, SHA256: hex.EncodeToString(h.Sum(nil))}, nil
}

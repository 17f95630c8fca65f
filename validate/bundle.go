package validate

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"

	"github.com/santhosh-tekuri/jsonschema/v5"

	"trajvault/internal/bagit"
	"trajvault/internal/h5"
	"trajvault/schema"
)

// BundleOptions tune a bundle check.
type BundleOptions struct {
	ToolVersion string
	Profile     string // built-in name or JSON Schema file; "" = minimal
	Limits      bagit.Limits
	// MaxImageBytes bounds a trajectory file read into memory from an
	// archive for its layout check (larger ones are reported, not read).
	MaxImageBytes int64
}

// IsBundle reports whether path looks like a bundle: a folder with
// bagit.txt, or a .zip / .tar.zst archive.
func IsBundle(path string) bool {
	if strings.HasSuffix(path, ".zip") || strings.HasSuffix(path, ".tar.zst") {
		return true
	}
	_, err := os.Stat(filepath.Join(path, "bagit.txt"))
	return err == nil
}

// Bundle checks a deposit bundle: BagIt completeness and validity (RFC
// 8493 sec. 3) with every checksum, path safety, the layout of every
// trajectory file, the RO-Crate and DataCite metadata, and a funder
// profile. Codes: B (bag), V/E (trajectory files, path prefixed with the
// file), M (metadata).
func Bundle(path string, opt BundleOptions) (*Report, error) {
	if opt.Limits == (bagit.Limits{}) {
		opt.Limits = bagit.DefaultLimits
	}
	if opt.MaxImageBytes == 0 {
		opt.MaxImageBytes = 2 << 30
	}
	src, err := bagit.Open(path, opt.Limits)
	if err != nil {
		return nil, err
	}
	rep := &Report{Tool: Tool{Name: "trajvault", Version: opt.ToolVersion}, File: path, LayoutVersion: schema.Current().Version}
	var mu sync.Mutex
	addF := func(f Finding) {
		mu.Lock()
		rep.Findings = append(rep.Findings, f)
		mu.Unlock()
	}
	dirBag := false
	if st, err := os.Stat(path); err == nil && st.IsDir() {
		dirBag = true
	}
	onPayload := func(name string, size int64, r io.Reader) error {
		if !strings.HasSuffix(name, ".h5") {
			return nil
		}
		var fr *Report
		if dirBag {
			// The bag walk found this regular file; validate it in place.
			var err error
			fr, err = File(filepath.Join(path, filepath.FromSlash(name)), Options{ToolVersion: opt.ToolVersion})
			if err != nil {
				addF(Finding{Code: "B7", Severity: Error, Path: name, Message: err.Error()})
				return nil
			}
		} else {
			if size > opt.MaxImageBytes {
				addF(Finding{Code: "B13", Severity: Warning, Path: name, Message: fmt.Sprintf("%d bytes: too large to check in memory; unpack the archive and validate the file", size)})
				return nil
			}
			img, err := io.ReadAll(io.LimitReader(r, opt.MaxImageBytes))
			if err != nil {
				return err
			}
			f, err := h5.OpenImage(name, img)
			if err != nil {
				addF(Finding{Code: "B7", Severity: Error, Path: name, Message: err.Error()})
				return nil
			}
			fr = Opened(f, name, Options{ToolVersion: opt.ToolVersion})
			f.Close()
		}
		for _, fd := range fr.Findings {
			fd.Path = name + ":" + fd.Path
			addF(fd)
		}
		return nil
	}
	res := bagit.Check(src, bagit.Options{OnPayload: onPayload})
	for _, f := range res.Findings {
		rep.Findings = append(rep.Findings, Finding{Code: f.Code, Severity: Severity(f.Severity), Path: f.Path, Message: f.Message})
	}
	checkMetadata(src, res, opt, rep)
	rep.finish()
	return rep, nil
}

// manifestSHA256 reads manifest-sha256.txt into path -> digest.
func manifestSHA256(src bagit.Source) map[string]string {
	out := map[string]string{}
	b, err := src.ReadSmall("manifest-sha256.txt", 1<<30)
	if err != nil {
		return out
	}
	for _, l := range strings.Split(string(b), "\n") {
		if sum, p, ok := strings.Cut(l, " "); ok {
			out[bagit.DecodePath(strings.TrimSpace(p))] = sum
		}
	}
	return out
}

func checkMetadata(src bagit.Source, res *bagit.Result, opt BundleOptions, rep *Report) {
	add := func(code string, sev Severity, path, format string, args ...any) {
		rep.Findings = append(rep.Findings, Finding{Code: code, Severity: sev, Path: path, Message: fmt.Sprintf(format, args...)})
	}
	payload := map[string]bool{}
	for _, p := range res.Payload {
		payload[p] = true
	}
	// RO-Crate 1.1.
	const crateName = "data/ro-crate-metadata.json"
	if b, err := src.ReadSmall(crateName, 64<<20); err != nil {
		add("M1", Error, crateName, "missing: the bundle describes itself in RO-Crate 1.1 metadata")
	} else {
		checkCrate(b, payload, manifestSHA256(src), add)
	}
	// DataCite 4.5 and the funder profile.
	const dcName = "data/datacite.json"
	b, err := src.ReadSmall(dcName, 64<<20)
	if err != nil {
		add("M2", Error, dcName, "missing: DataCite metadata is what repositories register")
		return
	}
	var dc any
	if err := json.Unmarshal(b, &dc); err != nil {
		add("M2", Error, dcName, "not JSON: %v", err)
		return
	}
	m, _ := dc.(map[string]any)
	for _, k := range []string{"identifier", "creators", "titles", "publisher", "publicationYear", "types"} {
		if _, ok := m[k]; !ok {
			add("M2", Error, dcName+"#/"+k, "missing: a mandatory DataCite 4.5 property")
		}
	}
	profile := opt.Profile
	if profile == "" {
		profile = "minimal"
	}
	sch, err := schema.Profile(profile)
	if err != nil {
		add("M3", Error, profile, "%v", err)
		return
	}
	if err := sch.Validate(dc); err != nil {
		var ve *jsonschema.ValidationError
		if errors.As(err, &ve) {
			for _, l := range leafErrors(ve) {
				add("M3", Error, dcName+"#"+l[0], "profile %s: %s", profile, l[1])
			}
		} else {
			add("M3", Error, dcName, "profile %s: %v", profile, err)
		}
	}
}

func leafErrors(ve *jsonschema.ValidationError) [][2]string {
	if len(ve.Causes) == 0 {
		return [][2]string{{ve.InstanceLocation, ve.Message}}
	}
	var out [][2]string
	for _, c := range ve.Causes {
		out = append(out, leafErrors(c)...)
	}
	return out
}

// checkCrate asserts the RO-Crate 1.1 requirements: the context, the
// metadata descriptor (conformsTo 1.1, about the root), the root Dataset
// with name, description, datePublished and license, and that every File
// entity exists, is reachable from the root by hasPart and has the sha256
// of the bag's manifest.
func checkCrate(b []byte, payload map[string]bool, sums map[string]string, add func(string, Severity, string, string, ...any)) {
	const at = "data/ro-crate-metadata.json"
	var doc struct {
		Context any              `json:"@context"`
		Graph   []map[string]any `json:"@graph"`
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		add("M1", Error, at, "not JSON-LD: %v", err)
		return
	}
	if ctx, _ := doc.Context.(string); ctx != "https://w3id.org/ro/crate/1.1/context" {
		add("M1", Error, at+"#@context", "must be https://w3id.org/ro/crate/1.1/context")
	}
	byID := map[string]map[string]any{}
	for _, e := range doc.Graph {
		id, _ := e["@id"].(string)
		if _, dup := byID[id]; dup {
			add("M1", Error, at+"#"+id, "@id used twice; @graph ids must be unique")
		}
		byID[id] = e
	}
	ref := func(v any) string {
		if m, ok := v.(map[string]any); ok {
			s, _ := m["@id"].(string)
			return s
		}
		return ""
	}
	desc := byID["ro-crate-metadata.json"]
	if desc == nil || ref(desc["about"]) != "./" || ref(desc["conformsTo"]) != "https://w3id.org/ro/crate/1.1" {
		add("M1", Error, at+"#ro-crate-metadata.json", "the metadata descriptor must conform to https://w3id.org/ro/crate/1.1 and be about ./")
	}
	root := byID["./"]
	if root == nil {
		add("M1", Error, at+"#./", "no root Dataset entity")
		return
	}
	if !hasType(root, "Dataset") {
		add("M1", Error, at+"#./", "the root entity must be a Dataset")
	}
	for _, k := range []string{"name", "description", "datePublished", "license"} {
		if root[k] == nil {
			add("M1", Error, at+"#./", "root Dataset lacks %s (required by RO-Crate 1.1)", k)
		}
	}
	parts := map[string]bool{}
	if l, ok := root["hasPart"].([]any); ok {
		for _, p := range l {
			parts[ref(p)] = true
		}
	}
	for id, e := range byID {
		if !hasType(e, "File") || strings.HasPrefix(id, "#") {
			continue
		}
		p := "data/" + id
		if !payload[p] {
			add("M1", Error, at+"#"+id, "File entity names a file that is not in the bag")
			continue
		}
		if !parts[id] {
			add("M1", Error, at+"#"+id, "File entity not reachable from the root by hasPart")
		}
		if s, _ := e["sha256"].(string); s != sums[p] {
			add("M1", Error, at+"#"+id, "sha256 differs from the bag's manifest-sha256.txt")
		}
	}
}

func hasType(e map[string]any, t string) bool {
	switch v := e["@type"].(type) {
	case string:
		return v == t
	case []any:
		for _, x := range v {
			if x == t {
				return true
			}
		}
	}
	return false
}

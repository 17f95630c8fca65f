package validate

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"github.com/santhosh-tekuri/jsonschema/v5"

	"trajvault/internal/bagit"
	"trajvault/internal/finding"
	"trajvault/internal/h5"
	"trajvault/schema"
)

// BundleOptions tune a bundle check.
type BundleOptions struct {
	ToolVersion string
	Profile     string // built-in name or JSON Schema file; "" = minimal
	// FileProfile chooses the rules for the trajectory files inside
	// (Options.Profile); "" lets each file say.
	FileProfile Profile
	Limits      bagit.Limits
	// MaxMemberBytes bounds a trajectory file of an archive written to
	// the temporary folder for its layout check (larger ones, and ones
	// larger than the free space there, are reported as B15, not read);
	// 0 means Limits.MaxEntryBytes.
	MaxMemberBytes int64
	// FixityOnly checks the bag alone (RFC 8493 completeness and
	// checksums), not the trajectory files nor the metadata: a repository's
	// periodic sweep at the speed of hashing. Digests limits the
	// checksums to these algorithms (bagit.Options.Digests).
	FixityOnly bool
	Digests    []string
	// Member, when set, checks one trajectory file of the bundle in
	// place of Member below: the command runs it in a worker process
	// of its own, so that a file that crashes the HDF5 library is a
	// finding of that file and the other files are still checked (issue
	// 12). Bundle gives path, the file on disk (in a folder bag, or an
	// archive member written to a temporary file), and img nil; img is
	// for callers that hold a file's bytes.
	Member func(name string, img []byte, path string) []finding.Finding
}

// Member checks one trajectory file of a bundle, name being its path
// inside the bag: from img (its bytes, opened in memory) or, when img is
// nil, from the file at path. A file HDF5 cannot open is B14.
func Member(name string, img []byte, path string, p Profile) []finding.Finding {
	var f *h5.File
	var err error
	if img != nil {
		f, err = h5.OpenImage(name, img)
	} else {
		f, err = h5.Open(path)
	}
	if err != nil {
		return []finding.Finding{{Code: "B14", Severity: finding.Error, Location: finding.Location{Path: name}, Message: err.Error()}}
	}
	defer f.Close()
	return check(f, name, p)
}

// IsBundle reports whether path looks like a bundle: a folder with
// bagit.txt, or a .zip / .tar.zst archive.
func IsBundle(path string) bool {
	if strings.HasSuffix(path, ".zip") || strings.HasSuffix(path, ".tar.zst") {
		return true
	}
	_, err := os.Stat(filepath.Join(path, bagit.DeclarationFile))
	return err == nil
}

// Bundle checks a deposit bundle: BagIt completeness and validity (RFC
// 8493 sec. 3) with every checksum, path safety, the layout of every
// trajectory file, the RO-Crate and DataCite metadata, and a funder
// profile. Codes: B (bag), V/E/R (trajectory files, located by the file
// inside the bag and the HDF5 path), M (metadata).
//
// Memory does not grow with the size of a trajectory file (issue 14):
// the bag checker streams each payload file through every checksum; a
// trajectory file of a folder bag is then checked in place, one of an
// archive is written, as it streams past, to a file in a private
// temporary folder (removed after) and checked from there. An archive
// member larger than MaxMemberBytes or than the free space there is
// reported (B15), not written.
func Bundle(path string, opt BundleOptions) (*Report, error) {
	if opt.Limits == (bagit.Limits{}) {
		opt.Limits = bagit.DefaultLimits
	}
	if opt.MaxMemberBytes == 0 {
		opt.MaxMemberBytes = opt.Limits.MaxEntryBytes
	}
	src, err := bagit.Open(path, opt.Limits)
	if err != nil {
		return nil, err
	}
	rep := &Report{Tool: Tool{Name: "trajvault", Version: opt.ToolVersion}, File: path, LayoutVersion: schema.Current().Version}
	dirBag := false
	if st, err := os.Stat(path); err == nil && st.IsDir() {
		dirBag = true
	}
	member := opt.Member
	if member == nil {
		member = func(name string, img []byte, path string) []finding.Finding {
			return Member(name, img, path, opt.FileProfile)
		}
	}
	// The metadata files are kept as they stream past, so that an archive
	// is not read again to find them.
	meta := map[string][]byte{schema.CratePath: nil, schema.DataCitePath: nil}
	var sp *spool // made at the first trajectory member of an archive
	defer func() {
		if sp != nil {
			sp.Close()
		}
	}()
	onPayload := func(name string, size int64, r io.Reader) error {
		if _, ok := meta[name]; ok && size <= maxMetadataBytes {
			b, err := io.ReadAll(io.LimitReader(r, maxMetadataBytes))
			meta[name] = b
			return err
		}
		if !schema.IsTrajectory(name) {
			return nil
		}
		if dirBag {
			// A file the walk of the bag found (never a path taken from
			// a manifest), read again by HDF5 in ranges.
			rep.Findings = append(rep.Findings, member(name, nil, filepath.Join(path, filepath.FromSlash(name)))...)
			return nil
		}
		if sp == nil {
			s, err := newSpool(opt.MaxMemberBytes)
			if err != nil {
				return err
			}
			sp = s
		}
		tmp, err := sp.write(size, r)
		if errors.Is(err, errSpoolFull) {
			rep.Findings = append(rep.Findings, finding.Finding{Code: "B15", Severity: finding.Warning, Location: finding.Location{Path: name},
				Message: fmt.Sprintf("not checked: %v; unpack the archive where there is room and validate the file", err)})
			return nil
		}
		if err != nil {
			return err
		}
		defer sp.release(tmp)
		for _, f := range member(name, nil, tmp) {
			// A message that quotes the temporary file names the member.
			f.Message = strings.ReplaceAll(f.Message, tmp, name)
			rep.Findings = append(rep.Findings, f)
		}
		return nil
	}
	if opt.FixityOnly {
		res := bagit.Check(src, bagit.Options{Digests: opt.Digests})
		rep.Findings = append(rep.Findings, res.Findings...)
		rep.Findings = append(rep.Findings, finding.Finding{Code: "B20", Severity: finding.Note, Location: finding.Location{Path: "data/"},
			Message: "fixity only: trajectory files, RO-Crate and DataCite metadata not checked; run validate without --fixity-only for the full check"})
		rep.finish()
		return rep, nil
	}
	res := bagit.Check(src, bagit.Options{OnPayload: onPayload, Digests: opt.Digests})
	rep.Findings = append(rep.Findings, res.Findings...)
	checkMetadata(src, res, meta, opt, rep)
	rep.finish()
	return rep, nil
}

// maxMetadataBytes bounds a metadata file read into memory.
const maxMetadataBytes = 64 << 20

// manifestSHA256 reads manifest-sha256.txt into path -> digest.
func manifestSHA256(src bagit.Source) map[string]string {
	out := map[string]string{}
	limit, _ := bagit.ManifestLimits(src.Entries(), false) // bounded by the payload
	b, err := src.ReadSmall(schema.ManifestSHA256, limit)
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

// adder records a metadata finding.
type adder func(code string, sev finding.Severity, path, format string, args ...any)

// checkMetadata checks the crate and DataCite files, taking them from
// seen (kept while the payload streamed) or else reading them from src.
func checkMetadata(src bagit.Source, res *bagit.Result, seen map[string][]byte, opt BundleOptions, rep *Report) {
	add := func(code string, sev finding.Severity, path, format string, args ...any) {
		rep.Findings = append(rep.Findings, finding.Finding{Code: code, Severity: sev, Location: finding.Location{Path: path}, Message: fmt.Sprintf(format, args...)})
	}
	read := func(name string) ([]byte, error) {
		if b := seen[name]; b != nil {
			return b, nil
		}
		return src.ReadSmall(name, maxMetadataBytes)
	}
	payload := map[string]bool{}
	for _, p := range res.Payload {
		payload[p] = true
	}
	// RO-Crate 1.1.
	if b, err := read(schema.CratePath); err != nil {
		add("M1", finding.Error, schema.CratePath, "missing: the bundle describes itself in RO-Crate 1.1 metadata")
	} else {
		checkCrate(b, payload, manifestSHA256(src), add)
	}
	// DataCite 4.5 and the funder profile.
	dcName := schema.DataCitePath
	b, err := read(dcName)
	if err != nil {
		add("M2", finding.Error, dcName, "missing: DataCite metadata is what repositories register")
		return
	}
	var dc any
	if err := json.Unmarshal(b, &dc); err != nil {
		add("M2", finding.Error, dcName, "not JSON: %v", err)
		return
	}
	m, _ := dc.(map[string]any)
	for _, k := range []string{"identifier", "creators", "titles", "publisher", "publicationYear", "types"} {
		if _, ok := m[k]; !ok {
			add("M2", finding.Error, dcName+"#/"+k, "missing: a mandatory DataCite 4.5 property")
		}
	}
	profile := opt.Profile
	if profile == "" {
		profile = "minimal"
	}
	sch, err := schema.Profile(profile)
	if err != nil {
		add("M3", finding.Error, profile, "%v", err)
		return
	}
	if err := sch.Validate(dc); err != nil {
		var ve *jsonschema.ValidationError
		if errors.As(err, &ve) {
			for _, l := range leafErrors(ve) {
				add("M3", finding.Error, dcName+"#"+l[0], "profile %s: %s", profile, l[1])
			}
		} else {
			add("M3", finding.Error, dcName, "profile %s: %v", profile, err)
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
func checkCrate(b []byte, payload map[string]bool, sums map[string]string, add adder) {
	const at = schema.CratePath
	var doc struct {
		Context any              `json:"@context"`
		Graph   []map[string]any `json:"@graph"`
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		add("M1", finding.Error, at, "not JSON-LD: %v", err)
		return
	}
	if ctx, _ := doc.Context.(string); ctx != schema.CrateContext {
		add("M1", finding.Error, at+"#@context", "must be %s", schema.CrateContext)
	}
	byID := map[string]map[string]any{}
	for _, e := range doc.Graph {
		id, _ := e["@id"].(string)
		if _, dup := byID[id]; dup {
			add("M1", finding.Error, at+"#"+id, "@id used twice; @graph ids must be unique")
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
	desc := byID[schema.CrateFile]
	if desc == nil || ref(desc["about"]) != schema.CrateRootID || ref(desc["conformsTo"]) != schema.CrateConformsTo {
		add("M1", finding.Error, at+"#"+schema.CrateFile, "the metadata descriptor must conform to %s and be about %s", schema.CrateConformsTo, schema.CrateRootID)
	}
	root := byID[schema.CrateRootID]
	rootAt := at + "#" + schema.CrateRootID
	if root == nil {
		add("M1", finding.Error, rootAt, "no root Dataset entity")
		return
	}
	if !hasType(root, "Dataset") {
		add("M1", finding.Error, rootAt, "the root entity must be a Dataset")
	}
	for _, k := range []string{"name", "description", "datePublished", "license"} {
		if root[k] == nil {
			add("M1", finding.Error, rootAt, "root Dataset lacks %s (required by RO-Crate 1.1)", k)
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
		p := schema.PayloadPath(id)
		if !payload[p] {
			add("M1", finding.Error, at+"#"+id, "File entity names a file that is not in the bag")
			continue
		}
		if !parts[id] {
			add("M1", finding.Error, at+"#"+id, "File entity not reachable from the root by hasPart")
		}
		if s, _ := e["sha256"].(string); s != sums[p] {
			add("M1", finding.Error, at+"#"+id, "sha256 differs from the bag's %s", schema.ManifestSHA256)
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

package pack

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"mime"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"time"

	"github.com/klauspost/compress/zstd"

	"trajvault/ingest"
	"trajvault/internal/bagit"
	"trajvault/internal/progress"
	"trajvault/internal/trajfile"
	"trajvault/schema"
)

// BundleOptions say what goes into a deposit bundle.
type BundleOptions struct {
	Deposit     *Deposit
	Algorithms  []string // payload manifests, e.g. sha512, sha256 (and md5)
	KeepSources bool     // add the original logs, zstd-compressed
	Jobs        int
	ToolVersion string
	Now         time.Time
	// Card extras computed by the caller (the audit lives beside pack).
	AuditLines []string
	Plots      map[string][]byte // file name -> SVG
	// Split bundles: this bag's place in the group (RFC 8493 Bag-Count).
	GroupID                string
	GroupIndex, GroupCount int
	// Progress counts payload bytes checksummed (nil: not counted).
	Progress progress.Counter
}

// Converted is one trajectory in the bundle.
type Converted struct {
	Report *ingest.TrajReport
	Result *ingest.Result
	File   string // path inside the bag, data/...
}

// WriteBundle writes the payload of a bag into dir (data/...) from
// converted trajectories, then makes the bag. dir is the caller's
// temporary folder; the caller renames it into place.
func WriteBundle(ctx context.Context, dir string, conv []Converted, o BundleOptions) error {
	data := filepath.Join(dir, schema.PayloadDir)
	if o.KeepSources {
		for _, c := range conv {
			for _, f := range c.Report.Files {
				dst := filepath.Join(data, "sources", c.Report.Name, filepath.Base(f.File)+".zst")
				if err := compressFile(f.File, dst); err != nil {
					return err
				}
			}
		}
	}
	if len(o.Plots) > 0 {
		os.MkdirAll(filepath.Join(data, "plots"), 0o755)
		for name, svg := range o.Plots {
			if err := os.WriteFile(filepath.Join(data, "plots", name), svg, 0o644); err != nil {
				return err
			}
		}
	}
	// Provenance of each trajectory beside the files, for readers without
	// HDF5 tools (the same record is inside each file).
	for _, c := range conv {
		rec, err := trajfile.Parameter(filepath.Join(dir, filepath.FromSlash(c.File)), "trajvault_provenance")
		if err != nil {
			return err
		}
		dst := filepath.Join(data, "provenance", c.Report.Name+".json")
		os.MkdirAll(filepath.Dir(dst), 0o755)
		if err := os.WriteFile(dst, []byte(rec+"\n"), 0o644); err != nil {
			return err
		}
	}
	summaries := make([]*trajfile.Summary, len(conv))
	for i, c := range conv {
		s, err := trajfile.Summarize(filepath.Join(dir, filepath.FromSlash(c.File)))
		if err != nil {
			return err
		}
		summaries[i] = s
	}
	desc := dataDescription(conv, summaries, o)
	if err := os.WriteFile(filepath.Join(data, "README.md"), []byte(desc), 0o644); err != nil {
		return err
	}
	dc, err := json.MarshalIndent(dataCite(o.Deposit, dir, o), "", "  ")
	if err != nil {
		return err
	}
	if err := os.WriteFile(filepath.Join(data, schema.DataCiteFile), dc, 0o644); err != nil {
		return err
	}
	// Every payload file but the crate exists now: hash each once, for
	// the crate's sha256 and for the bag's manifests alike.
	algs := o.Algorithms
	if !slices.Contains(algs, "sha256") {
		algs = append(slices.Clone(algs), "sha256")
	}
	digests, err := bagit.HashPayload(ctx, dir, algs, o.Jobs, o.Progress)
	if err != nil {
		return err
	}
	crate, err := roCrate(dir, conv, digests, o)
	if err != nil {
		return err
	}
	cb, _ := json.MarshalIndent(crate, "", "  ")
	if err := os.WriteFile(filepath.Join(data, schema.CrateFile), cb, 0o644); err != nil {
		return err
	}
	d := o.Deposit
	var info bagit.Info
	if d.Contact != nil {
		info.Add("Contact-Name", d.Contact.Name)
		info.Add("Contact-Email", d.Contact.Email)
	}
	info.Add("External-Description", d.Title+". "+d.Description)
	if d.Identifier != "" {
		info.Add("External-Identifier", "https://doi.org/"+d.Identifier)
	}
	info.Add("Bag-Software-Agent", "trajvault "+o.ToolVersion)
	if o.GroupCount > 1 {
		info.Add("Bag-Group-Identifier", o.GroupID)
		info.Add("Bag-Count", fmt.Sprintf("%d of %d", o.GroupIndex, o.GroupCount))
	}
	return bagit.Make(ctx, dir, o.Algorithms, info, digests, o.Jobs, o.Now)
}

func compressFile(src, dst string) error {
	if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
		return err
	}
	in, err := os.Open(src)
	if err != nil {
		return err
	}
	defer in.Close()
	out, err := os.Create(dst)
	if err != nil {
		return err
	}
	enc, err := zstd.NewWriter(out, zstd.WithEncoderLevel(zstd.SpeedBetterCompression))
	if err != nil {
		out.Close()
		return err
	}
	if _, err := io.Copy(enc, in); err != nil {
		enc.Close()
		out.Close()
		return err
	}
	if err := enc.Close(); err != nil {
		out.Close()
		return err
	}
	return out.Close()
}

// payloadFiles lists data/ files with sizes (the crate's File entities).
func payloadFiles(dir string) ([][2]any, error) {
	var out [][2]any
	err := filepath.Walk(filepath.Join(dir, schema.PayloadDir), func(p string, info os.FileInfo, err error) error {
		if err != nil || !info.Mode().IsRegular() {
			return err
		}
		rel, _ := filepath.Rel(filepath.Join(dir, schema.PayloadDir), p)
		out = append(out, [2]any{filepath.ToSlash(rel), info.Size()})
		return nil
	})
	sort.Slice(out, func(i, j int) bool { return out[i][0].(string) < out[j][0].(string) })
	return out, err
}

var licenseURL = map[string]string{
	"CC-BY-4.0": "https://creativecommons.org/licenses/by/4.0/", "CC0-1.0": "https://creativecommons.org/publicdomain/zero/1.0/",
	"CC-BY-SA-4.0": "https://creativecommons.org/licenses/by-sa/4.0/", "ODbL-1.0": "https://opendatacommons.org/licenses/odbl/1-0/",
	"PDDL-1.0": "https://opendatacommons.org/licenses/pddl/1-0/",
}

func licenseID(spdx string) string {
	if u, ok := licenseURL[spdx]; ok {
		return u
	}
	return "https://spdx.org/licenses/" + spdx + ".html"
}

func mediaType(name string) string {
	switch filepath.Ext(name) {
	case schema.TrajectoryExt:
		return "application/x-hdf5"
	case ".md":
		return "text/markdown"
	case ".json":
		return "application/json"
	case ".svg":
		return "image/svg+xml"
	case ".zst":
		return "application/zstd"
	}
	if t := mime.TypeByExtension(filepath.Ext(name)); t != "" {
		return t
	}
	return "application/octet-stream"
}

func personID(c Creator) string {
	if c.ORCID != "" {
		return "https://orcid.org/" + c.ORCID
	}
	return "#" + strings.ReplaceAll(strings.ToLower(c.Name), " ", "-")
}

// roCrate builds ro-crate-metadata.json (RO-Crate 1.1): the descriptor,
// the root Dataset, File entities with size, format and sha256, Person and
// Organization entities, the licence, and one CreateAction per converted
// trajectory with trajvault as instrument and the simulation program as a
// SoftwareApplication; the root conforms to the process-run profile.
func roCrate(dir string, conv []Converted, digests bagit.Digests, o BundleOptions) (map[string]any, error) {
	d := o.Deposit
	files, err := payloadFiles(dir)
	if err != nil {
		return nil, err
	}
	var graph []map[string]any
	var parts []map[string]string
	for _, f := range files {
		name := f[0].(string)
		if name == schema.CrateFile {
			continue
		}
		sum := digests[schema.PayloadPath(name)].Sums["sha256"]
		if sum == "" {
			return nil, fmt.Errorf("%s: no checksum computed", name)
		}
		parts = append(parts, map[string]string{"@id": name})
		graph = append(graph, map[string]any{"@id": name, "@type": "File", "name": filepath.Base(name),
			"contentSize": fmt.Sprint(f[1]), "encodingFormat": mediaType(name), "sha256": sum})
	}
	var authors []map[string]string
	orgs := map[string]map[string]any{}
	for _, c := range d.Creators {
		p := map[string]any{"@id": personID(c), "@type": "Person", "name": c.Name}
		if c.Affiliation != "" {
			oid := c.ROR
			if oid == "" {
				oid = "#" + strings.ReplaceAll(strings.ToLower(c.Affiliation), " ", "-")
			}
			p["affiliation"] = map[string]string{"@id": oid}
			orgs[oid] = map[string]any{"@id": oid, "@type": "Organization", "name": c.Affiliation}
		}
		graph = append(graph, p)
		authors = append(authors, map[string]string{"@id": personID(c)})
	}
	for _, id := range sortedMapKeys(orgs) {
		graph = append(graph, orgs[id])
	}
	lic := licenseID(d.License)
	graph = append(graph, map[string]any{"@id": lic, "@type": "CreativeWork", "name": d.License, "identifier": d.License})
	tool := map[string]any{"@id": "#trajvault", "@type": "SoftwareApplication", "name": "trajvault", "version": o.ToolVersion}
	prog := map[string]any{"@id": "#simulation-program", "@type": "SoftwareApplication", "name": d.Simulation.Program.Name, "version": d.Simulation.Program.Version}
	if d.Simulation.Program.Commit != "" {
		prog["identifier"] = d.Simulation.Program.Commit
	}
	graph = append(graph, tool, prog)
	var actions []map[string]string
	for i, c := range conv {
		id := fmt.Sprintf("#convert-%s", c.Report.Name)
		var inputs []map[string]string
		for _, f := range c.Report.Files {
			inputs = append(inputs, map[string]string{"@id": "#source-" + c.Report.Name + "-" + filepath.Base(f.File)})
			graph = append(graph, map[string]any{"@id": "#source-" + c.Report.Name + "-" + filepath.Base(f.File), "@type": "File",
				"name": filepath.Base(f.File), "description": "original text log (not in the bundle unless --keep-sources)"})
		}
		graph = append(graph, map[string]any{"@id": id, "@type": "CreateAction", "name": "convert " + c.Report.Name,
			"instrument": map[string]string{"@id": "#trajvault"}, "object": inputs,
			"result": map[string]string{"@id": strings.TrimPrefix(c.File, schema.PayloadDir+"/")}, "agent": authors,
			"endTime": o.Now.UTC().Format(time.RFC3339), "actionStatus": "http://schema.org/CompletedActionStatus"})
		actions = append(actions, map[string]string{"@id": id})
		_ = i
	}
	root := map[string]any{
		"@id": schema.CrateRootID, "@type": "Dataset", "name": d.Title, "description": d.Description,
		"datePublished": o.Now.UTC().Format("2006-01-02"), "license": map[string]string{"@id": lic},
		"author": authors, "hasPart": parts, "mentions": actions,
		"conformsTo": map[string]string{"@id": "https://w3id.org/ro/wfrun/process/0.5"},
		"keywords":   strings.Join(d.Keywords, ", "),
	}
	if d.Version != "" {
		root["version"] = d.Version
	}
	if d.Identifier != "" {
		root["identifier"] = "https://doi.org/" + d.Identifier
	}
	for i, f := range d.Funding {
		fid := f.FunderID
		if fid == "" {
			fid = fmt.Sprintf("#funder-%d", i)
		}
		graph = append(graph, map[string]any{"@id": fid, "@type": "Organization", "name": f.Funder})
		root["funder"] = append(asList(root["funder"]), map[string]string{"@id": fid})
	}
	graph = append(graph, map[string]any{"@id": "https://w3id.org/ro/wfrun/process/0.5", "@type": "CreativeWork", "name": "Process Run Crate", "version": "0.5"})
	desc := map[string]any{"@id": schema.CrateFile, "@type": "CreativeWork",
		"conformsTo": map[string]string{"@id": schema.CrateConformsTo}, "about": map[string]string{"@id": schema.CrateRootID}}
	return map[string]any{"@context": schema.CrateContext, "@graph": append([]map[string]any{desc, root}, graph...)}, nil
}

func asList(v any) []map[string]string {
	if l, ok := v.([]map[string]string); ok {
		return l
	}
	return nil
}

func sortedMapKeys(m map[string]map[string]any) []string {
	var k []string
	for s := range m {
		k = append(k, s)
	}
	sort.Strings(k)
	return k
}

// dataCite builds datacite.json with the DataCite Metadata Schema 4.5
// mandatory properties (identifier, creators, titles, publisher,
// publicationYear, types) and the recommended and optional ones the
// deposit knows (subjects, dates, relatedIdentifiers, descriptions,
// rightsList, fundingReferences, version, sizes, formats).
func dataCite(d *Deposit, dir string, o BundleOptions) map[string]any {
	var creators []map[string]any
	for _, c := range d.Creators {
		cr := map[string]any{"name": c.Name, "nameType": "Personal"}
		if c.ORCID != "" {
			cr["nameIdentifiers"] = []map[string]string{{"nameIdentifier": "https://orcid.org/" + c.ORCID, "nameIdentifierScheme": "ORCID", "schemeUri": "https://orcid.org"}}
		}
		if c.Affiliation != "" {
			aff := map[string]string{"name": c.Affiliation}
			if c.ROR != "" {
				aff["affiliationIdentifier"], aff["affiliationIdentifierScheme"] = c.ROR, "ROR"
			}
			cr["affiliation"] = []map[string]string{aff}
		}
		creators = append(creators, cr)
	}
	id := map[string]string{"identifier": "", "identifierType": "DOI"}
	if d.Identifier != "" {
		id["identifier"] = d.Identifier
	}
	publisher := d.Publisher
	if publisher == "" {
		publisher = "(to be assigned by the repository)"
	}
	var subjects []map[string]string
	for _, k := range d.Keywords {
		subjects = append(subjects, map[string]string{"subject": k})
	}
	sim := d.Simulation
	methods := sim.Method
	if sim.ElectronicStructure != "" {
		methods += "; electronic structure: " + sim.ElectronicStructure
	}
	if sim.InitialConditions != "" {
		methods += "; initial conditions: " + sim.InitialConditions
	}
	tech := fmt.Sprintf("Simulated with %s %s; converted with trajvault %s to HDF5 in the H5MD 1.1 layout with the trajvault_electronic module 1.0.", sim.Program.Name, sim.Program.Version, o.ToolVersion)
	out := map[string]any{
		"identifier":      id,
		"creators":        creators,
		"titles":          []map[string]string{{"title": d.Title}},
		"publisher":       publisher,
		"publicationYear": o.Now.UTC().Format("2006"),
		"types":           map[string]string{"resourceTypeGeneral": "Dataset", "resourceType": "Molecular dynamics trajectories"},
		"subjects":        subjects,
		"dates":           []map[string]string{{"date": o.Now.UTC().Format("2006-01-02"), "dateType": "Created"}},
		"descriptions": []map[string]string{
			{"description": d.Description, "descriptionType": "Abstract"},
			{"description": methods, "descriptionType": "Methods"},
			{"description": tech, "descriptionType": "TechnicalInfo"},
		},
		"rightsList":    []map[string]string{{"rights": d.License, "rightsIdentifier": d.License, "rightsIdentifierScheme": "SPDX", "rightsUri": licenseID(d.License)}},
		"formats":       []string{"application/x-hdf5"},
		"schemaVersion": "http://datacite.org/schema/kernel-4",
	}
	if d.Version != "" {
		out["version"] = d.Version
	}
	if d.RelatedPublication != "" {
		out["relatedIdentifiers"] = []map[string]string{{"relatedIdentifier": d.RelatedPublication, "relatedIdentifierType": "DOI", "relationType": "IsSupplementTo"}}
	}
	var funding []map[string]string
	for _, f := range d.Funding {
		fr := map[string]string{"funderName": f.Funder}
		if f.FunderID != "" {
			fr["funderIdentifier"] = f.FunderID
		}
		if f.Grant != "" {
			fr["awardNumber"] = f.Grant
		}
		if f.Programme != "" {
			fr["awardTitle"] = f.Programme
		}
		funding = append(funding, fr)
	}
	if funding != nil {
		out["fundingReferences"] = funding
	}
	return out
}

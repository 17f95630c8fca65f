package bagit

import (
	"errors"
	"fmt"
	"io"
	"regexp"
	"slices"
	"sort"
	"strconv"
	"strings"

	"golang.org/x/text/unicode/norm"

	"trajvault/internal/finding"
)

// Result of checking a bag. Complete and Valid follow RFC 8493 sec. 3.
type Result struct {
	Complete bool
	Valid    bool
	Info     Info
	Payload  []string // payload files present
	// Unverified is set when Options.Digests left manifests unchecked:
	// Valid then speaks only for the algorithms that were computed.
	Unverified bool
	// Findings have stable codes (schema/layout.md, bundle rules); their
	// location's Path is a path inside the bag.
	Findings []finding.Finding
}

// Options of Check.
type Options struct {
	// OnPayload, when set, sees every payload file's content once while
	// it is hashed (e.g. to validate trajectory files), so that each file
	// is read from its source once; it may read any part of r. An error
	// it returns is reported as B14.
	OnPayload func(name string, size int64, r io.Reader) error
	// Digests, when set, limits the checksum check to these algorithms
	// (e.g. sha256 for a fixity sweep at the speed of one hash): the
	// manifests of the others are parsed and checked for completeness,
	// but their checksums are not computed, and each is reported (B20)
	// so that nobody reads the result as full validity.
	Digests []string
}

var (
	hexRE      = regexp.MustCompile(`^[0-9a-fA-F]+$`)
	manifestRE = regexp.MustCompile(`^(tag)?manifest-([a-z0-9]+)\.txt$`)
	oxumRE     = regexp.MustCompile(`^(\d+)\.(\d+)$`)
)

type manifest struct {
	alg   string
	tag   bool
	name  string
	lines map[string]string // path -> digest
}

// Check reads a bag from src and verifies it: required files, manifest
// syntax and path safety, completeness, every checksum, Payload-Oxum and
// tag manifests. It opens only entries that src listed, never a path
// taken from manifest text.
func Check(src Source, opt Options) *Result {
	res := &Result{}
	add := func(code string, sev finding.Severity, path, format string, args ...any) {
		res.Findings = append(res.Findings, finding.Finding{Code: code, Severity: sev, Location: finding.Location{Path: path}, Message: fmt.Sprintf(format, args...)})
	}
	entries := src.Entries()
	byName := map[string]Entry{}
	var payload []string
	seenFold := map[string]string{}
	for _, e := range entries {
		if first, dup := byName[e.Name]; dup && (e.Kind != Dir || first.Kind != Dir) {
			// An unpacker keeps one copy, a checker may read the other:
			// both copies are hashed (Each streams them) and the bag is
			// invalid whatever they hold.
			add("B18", finding.Error, e.Name, "the archive holds this name twice (entries %d and %d); an unpacker keeps only one copy: remove one", first.Pos, e.Pos)
			continue
		} else if dup {
			continue
		}
		byName[e.Name] = e
		switch e.Kind {
		case Symlink:
			add("B10", finding.Error, e.Name, "symbolic link (to %q) in the bag; bags hold regular files, and links are never followed", e.Target)
			continue
		case Other:
			add("B10", finding.Error, e.Name, "special file in the bag; bags hold regular files")
			continue
		case Dir:
			continue
		}
		if r := SafePath(e.Name); r != "" {
			add("B4", finding.Error, e.Name, "unsafe entry name (%s); not read", r)
			continue
		}
		if strings.HasPrefix(e.Name, "data/") {
			payload = append(payload, e.Name)
			// Portability (RFC 8493 sec. 6): names equal up to case or
			// Unicode normalisation collide on some file systems.
			k := strings.ToLower(norm.NFC.String(e.Name))
			if other, ok := seenFold[k]; ok {
				add("B12", finding.Warning, e.Name, "differs from %s only by case or Unicode normalisation; it collides on some file systems", other)
			}
			seenFold[k] = e.Name
		}
	}
	sort.Strings(payload)
	res.Payload = payload

	// bagit.txt
	decl, err := src.ReadSmall(DeclarationFile, declarationLimit)
	switch {
	case errors.Is(err, ErrLimit):
		add("B17", finding.Error, DeclarationFile, "larger than %d bytes; not read: it must read exactly %q", declarationLimit, Declaration)
	case err != nil:
		add("B1", finding.Error, DeclarationFile, "missing: every bag starts with bagit.txt declaring BagIt-Version 1.0")
	default:
		text := strings.ReplaceAll(string(decl), "\r\n", "\n")
		if strings.HasPrefix(text, "\ufeff") {
			add("B1", finding.Error, DeclarationFile, "starts with a byte-order mark; RFC 8493 forbids it")
			text = strings.TrimPrefix(text, "\ufeff")
		}
		if strings.TrimSpace(text) != strings.TrimSpace(Declaration) {
			add("B1", finding.Error, DeclarationFile, "must read exactly %q", Declaration)
		}
	}
	// bag-info.txt (optional)
	if b, err := src.ReadSmall(InfoFile, smallLimit); err == nil {
		info, perr := ParseInfo(string(b))
		if perr != nil {
			add("B11", finding.Error, InfoFile, "%v", perr)
		}
		res.Info = info
	} else if errors.Is(err, ErrLimit) {
		// Never ignored: its labels, Payload-Oxum included, go unchecked.
		add("B17", finding.Error, InfoFile, "larger than %d bytes; not read, so none of its labels (Payload-Oxum included) is checked: shorten it", smallLimit)
	} else if _, ok := byName[InfoFile]; ok {
		add("B13", finding.Error, InfoFile, "cannot read: %v", err)
	}
	// manifests
	var mans []*manifest
	names := make([]string, 0, len(entries))
	for _, e := range entries {
		names = append(names, e.Name)
	}
	sort.Strings(names)
	for _, n := range names {
		m := manifestRE.FindStringSubmatch(n)
		if m == nil || byName[n].Kind != File {
			continue
		}
		alg := m[2]
		if Algorithms[alg] == nil {
			add("B16", finding.Warning, n, "algorithm %q is not checked by this tool (sha512, sha256, md5 are)", alg)
			continue
		}
		tag := m[1] == "tag"
		maxBytes, maxLines := ManifestLimits(entries, tag)
		b, err := src.ReadSmall(n, maxBytes)
		if errors.Is(err, ErrLimit) {
			add("B17", finding.Error, n, "larger than the %d bytes that lines for the bag's %d files can fill; not read: list each file once", maxBytes, maxLines-manifestSlackLines)
			continue
		}
		if err != nil {
			add("B3", finding.Error, n, "cannot read: %v", err)
			continue
		}
		mf := &manifest{alg: alg, tag: tag, name: n, lines: map[string]string{}}
		text := strings.TrimSuffix(string(b), "\n")
		for i := 0; len(text) > 0; i++ {
			var line string
			line, text, _ = strings.Cut(text, "\n")
			line = strings.TrimSuffix(line, "\r")
			if line == "" {
				continue
			}
			if i >= maxLines {
				add("B19", finding.Error, n, "line %d: more lines than the bag has files (%d); the rest is not read: list each file once", i+1, maxLines-manifestSlackLines)
				break
			}
			sum, p, ok := strings.Cut(strings.TrimLeft(line, " "), " ")
			p = DecodePath(strings.TrimLeft(p, " \t*"))
			if !ok || !hexRE.MatchString(sum) || p == "" {
				add("B3", finding.Error, n, "line %d: expected \"<hex checksum> <path>\"", i+1)
				continue
			}
			if r := SafePath(p); r != "" {
				add("B4", finding.Error, n, "line %d: %q: %s; not followed", i+1, p, r)
				continue
			}
			if !mf.tag && !strings.HasPrefix(p, "data/") {
				add("B3", finding.Error, n, "line %d: %q is outside data/; payload manifests list payload files only", i+1, p)
				continue
			}
			if mf.tag && (strings.HasPrefix(p, "data/") || manifestRE.MatchString(p) && strings.HasPrefix(p, "tagmanifest-")) {
				add("B9", finding.Error, n, "line %d: %q may not be in a tag manifest", i+1, p)
				continue
			}
			if _, dup := mf.lines[p]; dup {
				add("B3", finding.Error, n, "line %d: %q listed twice", i+1, p)
			}
			mf.lines[p] = strings.ToLower(sum)
		}
		mans = append(mans, mf)
	}
	var payloadMans []*manifest
	for _, m := range mans {
		if !m.tag {
			payloadMans = append(payloadMans, m)
		}
	}
	if len(payloadMans) == 0 {
		add("B2", finding.Error, ".", "no payload manifest (manifest-sha512.txt or manifest-sha256.txt)")
	}
	// Completeness: every listed file exists, every payload file listed.
	complete := len(payloadMans) > 0 && !hasCode(res, "B1")
	for _, m := range mans {
		for p := range m.lines {
			if e, ok := byName[p]; !ok || e.Kind != File {
				add("B5", finding.Error, p, "listed in %s but missing from the bag", m.name)
				complete = false
			}
		}
	}
	for _, m := range payloadMans {
		for _, p := range payload {
			if _, ok := m.lines[p]; !ok {
				add("B6", finding.Error, p, "payload file not listed in %s", m.name)
				complete = false
			}
		}
	}
	// Payload-Oxum: a quick pre-check of octets and file count.
	var octets int64
	for _, p := range payload {
		octets += byName[p].Size
	}
	for _, ox := range res.Info.Get("Payload-Oxum") {
		m := oxumRE.FindStringSubmatch(ox)
		if m == nil {
			add("B8", finding.Error, "bag-info.txt", "Payload-Oxum %q: expected octets.files", ox)
			continue
		}
		o, _ := strconv.ParseInt(m[1], 10, 64)
		n, _ := strconv.Atoi(m[2])
		if o != octets || n != len(payload) {
			add("B8", finding.Error, "bag-info.txt", "Payload-Oxum says %d bytes in %d files, the payload has %d bytes in %d files", o, n, octets, len(payload))
		}
	}
	// Validity: stream every file once, all algorithms at once.
	want := map[string]map[string]string{} // path -> alg -> digest
	unverified := false
	for _, m := range mans {
		if len(opt.Digests) > 0 && !slices.Contains(opt.Digests, m.alg) {
			add("B20", finding.Note, m.name, "%s checksums not computed: the check was limited to %s; run a full check to verify them", m.alg, strings.Join(opt.Digests, ", "))
			unverified = true
			continue
		}
		for p, s := range m.lines {
			if want[p] == nil {
				want[p] = map[string]string{}
			}
			want[p][m.alg] = s
		}
	}
	valid := complete
	err = src.Each(func(name string, r io.Reader) error {
		e, ok := byName[name]
		if !ok || e.Kind != File || SafePath(name) != "" {
			return nil
		}
		algs := []string{}
		for a := range want[name] {
			algs = append(algs, a)
		}
		sort.Strings(algs)
		if len(algs) == 0 && opt.OnPayload == nil {
			return nil
		}
		compare := func(got map[string]string) {
			for _, a := range algs {
				if got[a] != want[name][a] {
					add("B7", finding.Error, name, "%s checksum differs from the manifest: the file changed or is damaged", a)
					valid = false
				}
			}
		}
		if opt.OnPayload == nil {
			// Checksums only: hash straight from the source, no pipe.
			got, _, err := sums(r, algs)
			if err != nil {
				return err
			}
			compare(got)
			return nil
		}
		pr, pw := io.Pipe()
		done := make(chan error, 1)
		if opt.OnPayload != nil && strings.HasPrefix(name, "data/") {
			go func() {
				err := opt.OnPayload(name, e.Size, pr)
				io.Copy(io.Discard, pr)
				done <- err
			}()
		} else {
			go func() { _, err := io.Copy(io.Discard, pr); done <- err }()
		}
		got, _, err := sums(io.TeeReader(r, pw), algs)
		pw.CloseWithError(err)
		if herr := <-done; herr != nil {
			add("B14", finding.Error, name, "content check failed: %v", herr)
		}
		if err != nil {
			return err
		}
		compare(got)
		return nil
	})
	if err != nil {
		add("B13", finding.Error, src.Name(), "reading stopped: %v", err)
		valid = false
	}
	res.Complete = complete
	res.Valid = valid && complete && !hasCode(res, "B4") && !hasCode(res, "B10")
	res.Unverified = unverified
	return res
}

// InfoFile is the bag's metadata tag file (RFC 8493 sec. 2.2.2).
const InfoFile = "bag-info.txt"

// declarationLimit bounds bagit.txt, whose exact content is 55 bytes.
const declarationLimit = 4096

// manifestSlackLines allows a few lines a manifest may hold beyond one per
// file (blank lines); anything more is B19.
const manifestSlackLines = 16

// ManifestLimits bounds a manifest by what the bag holds, so that its
// size never depends on the manifest's own claims (issue 12: 10 million
// duplicate lines in a 108 KB archive took 217 s and 6.2 GB): one line
// per file that it may list (payload files, or tag files for a tag
// manifest), each at most a 128-digit checksum, two spaces, the name
// with every byte percent-encoded (3 bytes each; RFC 8493 sec. 2.1.3
// encodes only CR, LF and %, so this is an upper bound) and CR LF, plus
// 64 KiB of slack.
func ManifestLimits(entries []Entry, tag bool) (maxBytes int64, maxLines int) {
	maxBytes = 64 << 10
	for _, e := range entries {
		if e.Kind != File || strings.HasPrefix(e.Name, "data/") == tag {
			continue
		}
		maxLines++
		maxBytes += 128 + 2 + 3*int64(len(e.Name)) + 2
	}
	return maxBytes, maxLines + manifestSlackLines
}

func hasCode(r *Result, code string) bool {
	for _, f := range r.Findings {
		if f.Code == code && f.Severity == finding.Error {
			return true
		}
	}
	return false
}

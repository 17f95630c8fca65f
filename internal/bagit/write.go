package bagit

import (
	"context"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"golang.org/x/sync/errgroup"

	"trajvault/internal/progress"
)

// Digest is the size and checksums (algorithm -> hex) of one payload
// file.
type Digest struct {
	Size int64
	Sums map[string]string
}

// Digests are payload files' digests by bag-relative path ("data/...").
type Digests map[string]Digest

// payloadList lists the regular files under dir/data, bag-relative and
// sorted; a symbolic link is an error (payloads hold regular files only).
func payloadList(dir string) ([]string, error) {
	var files []string
	err := filepath.WalkDir(filepath.Join(dir, "data"), func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.Type()&fs.ModeSymlink != 0 {
			return fmt.Errorf("bagit: %s is a symbolic link; payloads hold regular files only", p)
		}
		if d.Type().IsRegular() {
			rel, _ := filepath.Rel(dir, p)
			files = append(files, filepath.ToSlash(rel))
		}
		return nil
	})
	sort.Strings(files)
	return files, err
}

// HashPayload reads every payload file of dir once, computing all of algs
// in the same pass, workers files at a time, and returns their digests.
// The first error cancels the rest. done counts the bytes read (nil: not
// counted).
func HashPayload(ctx context.Context, dir string, algs []string, workers int, done progress.Counter) (Digests, error) {
	files, err := payloadList(dir)
	if err != nil {
		return nil, err
	}
	done = progress.Or(done)
	var total int64
	for _, f := range files {
		if st, err := os.Stat(filepath.Join(dir, filepath.FromSlash(f))); err == nil {
			total += st.Size()
		}
	}
	done.SetTotal(total)
	return hashFiles(ctx, dir, files, algs, workers, done)
}

func hashFiles(ctx context.Context, dir string, files, algs []string, workers int, done progress.Counter) (Digests, error) {
	for _, a := range algs {
		if Algorithms[a] == nil {
			return nil, fmt.Errorf("bagit: unknown algorithm %q", a)
		}
	}
	out := make([]Digest, len(files))
	g, ctx := errgroup.WithContext(ctx)
	g.SetLimit(max(workers, 1))
	for i, name := range files {
		g.Go(func() error {
			if err := ctx.Err(); err != nil {
				return err
			}
			f, err := os.Open(filepath.Join(dir, filepath.FromSlash(name)))
			if err != nil {
				return fmt.Errorf("bagit: %s: %w", name, err)
			}
			defer f.Close()
			s, n, err := sums(f, algs)
			if err != nil {
				return fmt.Errorf("bagit: %s: %w", name, err)
			}
			done.Add(n)
			out[i] = Digest{n, s}
			return nil
		})
	}
	if err := g.Wait(); err != nil {
		return nil, err
	}
	d := make(Digests, len(files))
	for i, name := range files {
		d[name] = out[i]
	}
	return d, nil
}

// Make turns dir, whose payload is already in dir/data, into a bag:
// payload manifests for every algorithm in algs (computed in parallel by
// workers, each file read once), bagit.txt, bag-info.txt (with
// Bagging-Date, Bag-Size and Payload-Oxum added after info) and tag
// manifests. Digests in known (from HashPayload, for files written
// before) are taken as they are when they hold every algorithm and the
// file's size has not changed, so no payload is read twice. Nothing
// outside dir is written.
func Make(ctx context.Context, dir string, algs []string, info Info, known Digests, workers int, now time.Time) error {
	files, err := payloadList(dir)
	if err != nil {
		return err
	}
	digests := make(Digests, len(files))
	var todo []string
	for _, name := range files {
		if k, ok := known[name]; ok && k.complete(algs) {
			if st, err := os.Stat(filepath.Join(dir, filepath.FromSlash(name))); err == nil && st.Size() == k.Size {
				digests[name] = k
				continue
			}
		}
		todo = append(todo, name)
	}
	fresh, err := hashFiles(ctx, dir, todo, algs, workers, progress.Nop{})
	if err != nil {
		return err
	}
	var octets int64
	for name, d := range fresh {
		digests[name] = d
	}
	for _, d := range digests {
		octets += d.Size
	}
	write := func(name, text string) error {
		return os.WriteFile(filepath.Join(dir, name), []byte(text), 0o644)
	}
	if err := write("bagit.txt", Declaration); err != nil {
		return err
	}
	for _, a := range algs {
		var b strings.Builder
		for _, f := range files {
			fmt.Fprintf(&b, "%s %s\n", digests[f].Sums[a], EncodePath(f))
		}
		if err := write("manifest-"+a+".txt", b.String()); err != nil {
			return err
		}
	}
	info.Add("Bagging-Date", now.UTC().Format("2006-01-02"))
	info.Add("Bag-Size", HumanSize(octets))
	info.Add("Payload-Oxum", fmt.Sprintf("%d.%d", octets, len(files)))
	if err := write("bag-info.txt", info.Format()); err != nil {
		return err
	}
	// Tag manifests cover bagit.txt, bag-info.txt and the payload
	// manifests; never other tag manifests.
	tags := []string{"bag-info.txt", "bagit.txt"}
	for _, a := range algs {
		tags = append(tags, "manifest-"+a+".txt")
	}
	sort.Strings(tags)
	for _, a := range algs {
		var b strings.Builder
		for _, t := range tags {
			f, err := os.Open(filepath.Join(dir, t))
			if err != nil {
				return err
			}
			s, _, err := sums(f, []string{a})
			f.Close()
			if err != nil {
				return err
			}
			fmt.Fprintf(&b, "%s %s\n", s[a], t)
		}
		if err := write("tagmanifest-"+a+".txt", b.String()); err != nil {
			return err
		}
	}
	return nil
}

// complete reports whether d holds a checksum for every algorithm.
func (d Digest) complete(algs []string) bool {
	for _, a := range algs {
		if d.Sums[a] == "" {
			return false
		}
	}
	return true
}

// HumanSize writes a byte count in SI units (kB = 1000 B), as Bag-Size
// does (RFC 8493 sec. 2.2.2).
func HumanSize(n int64) string {
	const unit = 1000
	if n < unit {
		return fmt.Sprintf("%d B", n)
	}
	div, exp := int64(unit), 0
	for m := n / unit; m >= unit; m /= unit {
		div *= unit
		exp++
	}
	return fmt.Sprintf("%.1f %cB", float64(n)/float64(div), "kMGTPE"[exp])
}

package bagit

import (
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"time"
)

// Make turns dir, whose payload is already in dir/data, into a bag:
// payload manifests for every algorithm in algs (computed in parallel by
// workers, each file read once), bagit.txt, bag-info.txt (with
// Bagging-Date, Bag-Size and Payload-Oxum added after info) and tag
// manifests. Nothing outside dir is written.
func Make(dir string, algs []string, info Info, workers int, now time.Time) error {
	for _, a := range algs {
		if Algorithms[a] == nil {
			return fmt.Errorf("bagit: unknown algorithm %q", a)
		}
	}
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
	if err != nil {
		return err
	}
	sort.Strings(files)
	type result struct {
		sums map[string]string
		size int64
		err  error
	}
	results := make([]result, len(files))
	jobs := make(chan int)
	var wg sync.WaitGroup
	for w := 0; w < max(workers, 1); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range jobs {
				f, err := os.Open(filepath.Join(dir, filepath.FromSlash(files[i])))
				if err != nil {
					results[i].err = err
					continue
				}
				s, n, err := sums(f, algs)
				f.Close()
				results[i] = result{s, n, err}
			}
		}()
	}
	for i := range files {
		jobs <- i
	}
	close(jobs)
	wg.Wait()
	var octets int64
	for i, r := range results {
		if r.err != nil {
			return fmt.Errorf("bagit: %s: %w", files[i], r.err)
		}
		octets += r.size
	}
	write := func(name, text string) error {
		return os.WriteFile(filepath.Join(dir, name), []byte(text), 0o644)
	}
	if err := write("bagit.txt", Declaration); err != nil {
		return err
	}
	for _, a := range algs {
		var b strings.Builder
		for i, f := range files {
			fmt.Fprintf(&b, "%s %s\n", results[i].sums[a], EncodePath(f))
		}
		if err := write("manifest-"+a+".txt", b.String()); err != nil {
			return err
		}
	}
	info.Add("Bagging-Date", now.UTC().Format("2006-01-02"))
	info.Add("Bag-Size", humanSize(octets))
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

func humanSize(n int64) string {
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

package bagit

import (
	"archive/tar"
	"archive/zip"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"time"

	"github.com/klauspost/compress/zstd"
)

// archiveFiles lists the regular files of a bag folder, sorted, with the
// bag's folder name as their top-level prefix.
func archiveFiles(dir string) ([]string, error) {
	var files []string
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.Type().IsRegular() {
			files = append(files, p)
		}
		return nil
	})
	sort.Strings(files)
	return files, err
}

// WriteTarZst writes the bag folder dir as a zstd-compressed tar to w,
// deterministically: sorted entries, fixed times and owners, so that the
// same bag gives the same archive.
func WriteTarZst(dir string, w io.Writer, mtime time.Time) error {
	files, err := archiveFiles(dir)
	if err != nil {
		return err
	}
	enc, err := zstd.NewWriter(w, zstd.WithEncoderLevel(zstd.SpeedBetterCompression))
	if err != nil {
		return err
	}
	tw := tar.NewWriter(enc)
	base := filepath.Base(dir)
	for _, p := range files {
		rel, _ := filepath.Rel(dir, p)
		st, err := os.Stat(p)
		if err != nil {
			return err
		}
		h := &tar.Header{Name: base + "/" + filepath.ToSlash(rel), Mode: 0o644, Size: st.Size(), ModTime: mtime, Typeflag: tar.TypeReg, Format: tar.FormatPAX}
		if err := tw.WriteHeader(h); err != nil {
			return err
		}
		f, err := os.Open(p)
		if err != nil {
			return err
		}
		_, err = io.Copy(tw, f)
		f.Close()
		if err != nil {
			return err
		}
	}
	if err := tw.Close(); err != nil {
		return err
	}
	return enc.Close()
}

// WriteZip writes the bag folder dir as a zip archive to w (stored
// trajectory files are compressed already; deflate the rest).
func WriteZip(dir string, w io.Writer, mtime time.Time) error {
	files, err := archiveFiles(dir)
	if err != nil {
		return err
	}
	zw := zip.NewWriter(w)
	base := filepath.Base(dir)
	for _, p := range files {
		rel, _ := filepath.Rel(dir, p)
		method := zip.Deflate
		if filepath.Ext(p) == ".h5" || filepath.Ext(p) == ".zst" {
			method = zip.Store
		}
		fw, err := zw.CreateHeader(&zip.FileHeader{Name: base + "/" + filepath.ToSlash(rel), Method: method, Modified: mtime})
		if err != nil {
			return err
		}
		f, err := os.Open(p)
		if err != nil {
			return err
		}
		_, err = io.Copy(fw, f)
		f.Close()
		if err != nil {
			return err
		}
	}
	return zw.Close()
}

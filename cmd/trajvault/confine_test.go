package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestPackKeepSourcesConfined (issue 12, item 5: "with pack --keep-sources
// a ../../../../outside/secret.dat table is copied into the bundle"): a
// recipe that names a table outside the input folder, by ".." or by a
// symbolic link, stops pack with exit 2 before anything is read; no
// bundle is written and no message carries the outside file's content.
func TestPackKeepSourcesConfined(t *testing.T) {
	base, err := os.ReadFile(repo("testdata", "recipes", "tarnol.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	const secret = "secret-line-91c2 outside the input"
	cases := []struct{ name, table, words string }{
		{"dotdot", "../../../../outside/secret.dat", `".." element`},
		{"symlink", "extra.dat", "leads out of the input folder"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir, deposit := packFixture(t, "1", "200")
			outside := filepath.Join(dir, "outside")
			os.MkdirAll(outside, 0o755)
			os.WriteFile(filepath.Join(outside, "secret.dat"), []byte("# step "+secret+"\n0 1\n"), 0o644)
			logs := filepath.Join(dir, "logs")
			trajs, _ := filepath.Glob(filepath.Join(logs, "traj-*"))
			for _, tr := range trajs {
				os.Symlink(filepath.Join(outside, "secret.dat"), filepath.Join(tr, "extra.dat"))
			}
			rc := strings.Replace(string(base), "tables:\n", "tables:\n  - file: "+c.table+"\n", 1)
			rp := filepath.Join(dir, "recipe.yaml")
			os.WriteFile(rp, []byte(rc), 0o644)
			bag := filepath.Join(dir, "bag")
			code, out, errs := runCLI("pack", logs, "-o", bag, "--deposit", deposit, "--recipe", rp, "--keep-sources")
			if code != 2 {
				t.Fatalf("pack: exit %d, want 2\n%s%s", code, out, errs)
			}
			if !strings.Contains(errs, c.words) {
				t.Errorf("message %q lacks %q", errs, c.words)
			}
			if strings.Contains(out+errs, "secret-line") {
				t.Errorf("output echoes content from outside the input:\n%s%s", out, errs)
			}
			if _, err := os.Stat(bag); err == nil {
				t.Errorf("a bundle was written")
			}
			// Nothing under the working folder holds the outside bytes,
			// except the outside file itself.
			filepath.Walk(dir, func(p string, info os.FileInfo, err error) error {
				if err != nil || !info.Mode().IsRegular() || strings.HasPrefix(p, outside) {
					return nil
				}
				if b, _ := os.ReadFile(p); bytes.Contains(b, []byte("secret-line")) {
					t.Errorf("%s holds the outside file's content", p)
				}
				return nil
			})
		})
	}
}

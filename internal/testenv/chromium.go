package testenv

import (
	"image"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// Chromium is Debian's chromium, which renders HTML reports in tests
// (make test installs it).
func Chromium(t testing.TB) string {
	t.Helper()
	for _, c := range []string{"chromium", "chromium-browser"} {
		if p, err := exec.LookPath(c); err == nil {
			return p
		}
	}
	t.Fatal("chromium not found: install Debian's chromium (make test does)")
	return ""
}

// ChromiumArgs are the flags of a headless run that reaches no network
// (a profile of its own in dir), followed by extra.
func ChromiumArgs(dir string, extra ...string) []string {
	return append([]string{"--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--user-data-dir=" + filepath.Join(dir, "profile"), "--enable-logging=stderr", "--v=0"}, extra...)
}

// Screenshot renders the page file in headless Chromium at the window
// size "W,H" into dir/shot.png, fails the test on console errors, and
// returns the image.
func Screenshot(t testing.TB, dir, page, size string) image.Image {
	t.Helper()
	shot := filepath.Join(dir, "shot.png")
	out, err := exec.Command(Chromium(t), ChromiumArgs(dir, "--window-size="+size, "--screenshot="+shot, "file://"+page)...).CombinedOutput()
	if err != nil {
		t.Fatalf("chromium: %v\n%s", err, out)
	}
	if strings.Contains(string(out), "Uncaught") || strings.Contains(string(out), ":CONSOLE(") {
		t.Errorf("console messages:\n%s", out)
	}
	f, err := os.Open(shot)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	return img
}

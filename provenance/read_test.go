package provenance_test

import (
	"context"
	"encoding/json"
	"errors"
	"path/filepath"
	"reflect"
	"testing"

	"trajvault/ingest"
	"trajvault/internal/demo"
	"trajvault/internal/h5"
	"trajvault/internal/testenv"
	"trajvault/internal/trajfile"
	"trajvault/provenance"
)

// TestRoundTrip: the record ingest stores in a converted file reads back
// equal: Read gives the same fields encoding/json gives on its own, and
// encoding it again gives the stored text byte for byte.
func TestRoundTrip(t *testing.T) {
	rc, err := ingest.LoadRecipe(testenv.Repo("testdata", "recipes", "tarnol.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "traj-001")
	o := demo.LogOptions{Options: demo.DefaultOptions, Decimals: 8}
	o.Steps = 50
	if err := demo.WriteLogs(dir, o); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(t.TempDir(), "traj.h5")
	if _, _, err := ingest.ConvertFiles(context.Background(), []string{dir}, out, ingest.ConvertOptions{Options: ingest.Options{Recipe: rc}, ToolVersion: "1.2.3", CommandLine: []string{"trajvault", "convert"}}); err != nil {
		t.Fatal(err)
	}
	f, err := h5.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	a, err := f.Attr(trajfile.ParametersGroup, trajfile.ProvenanceAttr)
	if err != nil || len(a.Strings) != 1 {
		t.Fatalf("stored record: %v", err)
	}
	stored := a.Strings[0]
	rec, err := provenance.Read(f, out)
	if err != nil {
		t.Fatal(err)
	}
	var plain provenance.Record
	if err := json.Unmarshal([]byte(stored), &plain); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(*rec, plain) {
		t.Errorf("Read = %+v\nencoding/json = %+v", *rec, plain)
	}
	again, err := rec.JSON()
	if err != nil || string(again) != stored {
		t.Errorf("re-encoded record differs from the stored text:\n%s\n%s", again, stored)
	}
	if rec.ToolVersion != "1.2.3" || len(rec.Sources) == 0 || rec.Recipe != rc.Text {
		t.Errorf("record: %+v", rec)
	}
	for _, s := range rec.Sources {
		if !provenance.ValidSHA256(s.SHA256) {
			t.Errorf("%s: sha256 %q", s.Path, s.SHA256)
		}
	}
}

// TestParseErrors: malformed records give typed errors saying where.
func TestParseErrors(t *testing.T) {
	cases := []struct {
		name, in string
		want     error
		field    string
	}{
		{"empty", "", provenance.ErrSyntax, ""},
		{"array", `[1]`, provenance.ErrSyntax, ""},
		{"cut off", `{"tool":"trajvault","sources":[{"path":"a"`, provenance.ErrSyntax, ""},
		{"bad token", `{"tool":trajvault}`, provenance.ErrSyntax, ""},
		{"trailing data", `{"tool":"trajvault"} {}`, provenance.ErrSyntax, ""},
		{"sources not a list", `{"sources":7}`, provenance.ErrType, "sources"},
		{"bytes a string", `{"sources":[{"bytes":"12"}]}`, provenance.ErrType, "sources.bytes"},
		{"units not strings", `{"units":{"position":1}}`, provenance.ErrType, "units"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := provenance.Parse([]byte(c.in))
			var pe *provenance.Error
			if !errors.As(err, &pe) || !errors.Is(err, c.want) {
				t.Fatalf("err = %v, want %v", err, c.want)
			}
			if pe.Field != c.field {
				t.Errorf("field %q, want %q (%v)", pe.Field, c.field, err)
			}
		})
	}
	// Unknown fields are a newer writer's additions, not errors.
	if r, err := provenance.Parse([]byte(`{"tool":"trajvault","added_later":[1,2]}`)); err != nil || r.Tool != "trajvault" {
		t.Errorf("unknown field: %+v, %v", r, err)
	}
}

// TestReadMissing: a file without a record says so with ErrMissing.
func TestReadMissing(t *testing.T) {
	path := filepath.Join(t.TempDir(), "bare.h5")
	if err := demo.WriteH5(path, demo.DefaultOptions); err != nil {
		t.Fatal(err)
	}
	f, err := h5.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if _, err := provenance.Read(f, path); !errors.Is(err, provenance.ErrMissing) {
		t.Errorf("err = %v, want ErrMissing", err)
	}
}

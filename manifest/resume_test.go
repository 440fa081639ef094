package manifest

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// Issue 11: resume does not take dataset.json's presence as proof. A
// dataset.json that another run did not finish (wrong format, or a manifest
// checksum that is not the manifest's) is refused; a real one is complete.
func TestResumeChecksMoreThanPresence(t *testing.T) {
	marker := []byte(`{"run":"r"}`)
	mk := func(t *testing.T) (string, *Dataset) {
		dir := filepath.Join(t.TempDir(), "out")
		w, err := CreateWith(dir, CreateOptions{Marker: marker})
		if err != nil {
			t.Fatal(err)
		}
		if err := w.Append(&Record{ID: "000000", Objects: []Object{}}); err != nil {
			t.Fatal(err)
		}
		d := &Dataset{}
		if _, err := w.Finish(d); err != nil {
			t.Fatal(err)
		}
		return dir, d
	}
	dir, _ := mk(t)
	if _, _, err := Resume(dir, CreateOptions{Marker: marker}, nil); !errors.Is(err, ErrComplete) {
		t.Fatalf("finished folder: %v, want ErrComplete", err)
	}
	for name, edit := range map[string]func(dir string, d *Dataset){
		"manifest changed after": func(dir string, d *Dataset) {
			os.WriteFile(filepath.Join(dir, ManifestFile), []byte("{}\n"), 0o644)
		},
		"dataset.json of another format": func(dir string, d *Dataset) {
			d.Format = "trueset-dataset/1"
			b, _ := MarshalDataset(d)
			os.WriteFile(filepath.Join(dir, DatasetFile), b, 0o644)
		},
		"dataset.json not JSON": func(dir string, d *Dataset) {
			os.WriteFile(filepath.Join(dir, DatasetFile), []byte("images/000000.png"), 0o644)
		},
	} {
		dir, d := mk(t)
		edit(dir, d)
		_, _, err := Resume(dir, CreateOptions{Marker: marker}, nil)
		if err == nil || errors.Is(err, ErrComplete) || !strings.Contains(err.Error(), DatasetFile) {
			t.Errorf("%s: got %v, want a refusal naming dataset.json", name, err)
		}
	}
}

package manifest

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// Every reader refuses a dataset.json or shard.json whose format it does not
// know, naming the file and the format (issue 10).
func TestReadDatasetRefusesUnknownFormat(t *testing.T) {
	for _, format := range []string{"trueset-dataset/1", "trueset-dataset/99", "", "something-else"} {
		dir := t.TempDir()
		b, _ := json.Marshal(map[string]any{"format": format, "count": 0})
		if err := os.WriteFile(filepath.Join(dir, DatasetFile), b, 0o644); err != nil {
			t.Fatal(err)
		}
		_, err := ReadDataset(dir)
		if err == nil {
			t.Fatalf("format %q: accepted", format)
		}
		msg := err.Error()
		for _, want := range []string{filepath.Join(dir, DatasetFile), "format", Format} {
			if !strings.Contains(msg, want) {
				t.Errorf("format %q: error %q does not mention %q", format, msg, want)
			}
		}
		if format != "" && !strings.Contains(msg, format) {
			t.Errorf("format %q: error %q does not name it", format, msg)
		}

		sb, _ := json.Marshal(map[string]any{"dataset": map[string]any{"format": format}})
		if err := os.WriteFile(filepath.Join(dir, ShardFile), sb, 0o644); err != nil {
			t.Fatal(err)
		}
		if _, err := readShard(dir); err == nil || !strings.Contains(err.Error(), "format") {
			t.Errorf("shard format %q: got %v, want a refusal naming the format", format, err)
		}
	}
	dir := t.TempDir()
	b, _ := json.Marshal(map[string]any{"format": Format})
	if err := os.WriteFile(filepath.Join(dir, DatasetFile), b, 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := ReadDataset(dir); err != nil {
		t.Errorf("current format refused: %v", err)
	}
}

// The record's keys are trueset's own (issue 10): the box key says its
// corner form, so it cannot be read as the [x, y, w, h] "bbox" of the
// trade's common detection interchange JSON.
func TestRecordKeys(t *testing.T) {
	b, err := MarshalRecord(&Record{ID: "000000", Objects: []Object{{Instance: 1, Class: 1, Box: [4]int{1, 2, 5, 7}, Area: 9, Shown: 1, Shape: "circle"}}})
	if err != nil {
		t.Fatal(err)
	}
	var rec struct {
		Objects []map[string]json.RawMessage `json:"objects"`
	}
	if err := json.Unmarshal(b, &rec); err != nil {
		t.Fatal(err)
	}
	o := rec.Objects[0]
	for _, k := range []string{"box_x0y0x1y1", "shown", "shape", "measured_center", "measured_size"} {
		if _, ok := o[k]; !ok {
			t.Errorf("object lacks key %q: %s", k, b)
		}
	}
	// No plan set a factor here: none is written (issue 12, no zeros that
	// stand for "unknown"); with one set, it is.
	for _, k := range []string{"center", "size", "aspect", "angle", "intensity", "color", "value"} {
		if _, ok := o[k]; ok {
			t.Errorf("object without planned factors has key %q: %s", k, b)
		}
	}
	b2, _ := MarshalRecord(&Record{ID: "000000", Objects: []Object{{Instance: 1, Center: &[2]float64{1, 2}, Angle: Factor(0)}}})
	if !strings.Contains(string(b2), `"center":[1,2]`) || !strings.Contains(string(b2), `"angle":0`) {
		t.Errorf("planned center [1, 2] and angle 0 not written: %s", b2)
	}
	for _, k := range []string{"bbox", "visible", "kind", "centre", "colour"} {
		if _, ok := o[k]; ok {
			t.Errorf("object has the old key %q: %s", k, b)
		}
	}
	if got := string(o["box_x0y0x1y1"]); got != "[1,2,5,7]" {
		t.Errorf("box_x0y0x1y1 = %s, want [1,2,5,7]", got)
	}
}

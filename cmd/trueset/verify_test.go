package main

import (
	"bufio"
	"bytes"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// readRecords returns every record of dir's manifest.jsonl in order.
func readRecords(t *testing.T, dir string) []*manifest.Record {
	t.Helper()
	var recs []*manifest.Record
	if err := manifest.ReadManifest(dir, func(r *manifest.Record) error { recs = append(recs, r); return nil }); err != nil {
		t.Fatal(err)
	}
	return recs
}

// editRecord decodes the manifest line of record id as JSON, lets edit change
// it, and writes it back re-encoded; the other lines keep their bytes.
func editRecord(t *testing.T, dir, id string, edit func(r *manifest.Record)) {
	t.Helper()
	p := filepath.Join(dir, manifest.ManifestFile)
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	var out bytes.Buffer
	found := false
	sc := bufio.NewScanner(bytes.NewReader(b))
	sc.Buffer(nil, 16<<20)
	for sc.Scan() {
		line := sc.Bytes()
		err := manifest.DecodeManifest(bytes.NewReader(line), p, func(r *manifest.Record) error {
			if r.ID != id {
				return nil
			}
			found = true
			edit(r)
			nb, err := manifest.MarshalRecord(r)
			line = nb
			return err
		})
		if err != nil {
			t.Fatal(err)
		}
		out.Write(line)
		out.WriteByte('\n')
	}
	if !found {
		t.Fatalf("no record %s in %s", id, p)
	}
	if err := os.WriteFile(p, out.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

// refreshManifestSum writes the manifest's new SHA-256 into dataset.json, as
// a careful forger would.
func refreshManifestSum(t *testing.T, dir string) {
	t.Helper()
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		t.Fatal(err)
	}
	mb, err := os.ReadFile(filepath.Join(dir, manifest.ManifestFile))
	if err != nil {
		t.Fatal(err)
	}
	d.ManifestSHA256 = manifest.SHA256Hex(mb)
	db, err := manifest.MarshalDataset(d)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, manifest.DatasetFile), db, 0o644); err != nil {
		t.Fatal(err)
	}
}

// firstWithObjects returns the first record at or after index from that
// holds an object.
func firstWithObjects(t *testing.T, recs []*manifest.Record, from int) *manifest.Record {
	t.Helper()
	for _, r := range recs[from:] {
		if len(r.Objects) > 0 {
			return r
		}
	}
	t.Fatalf("no record from %d on holds an object", from)
	return nil
}

// inSplit returns the first record in split s.
func inSplit(t *testing.T, recs []*manifest.Record, s string) *manifest.Record {
	t.Helper()
	for _, r := range recs {
		if r.Split == s {
			return r
		}
	}
	t.Fatalf("no record in split %s", s)
	return nil
}

func TestVerifyDamage(t *testing.T) {
	pristine := filepath.Join(t.TempDir(), "pristine")
	// The default preset: count targets per class and in all (parts).
	wantCode(t, exitOK, "generate", "--out", pristine, "--count", "12", "--quiet")
	recs := readRecords(t, pristine)
	train, val := inSplit(t, recs, "train"), inSplit(t, recs, "val")

	cases := []struct {
		name   string
		id     string // record the damage is in; "" for a dataset-wide problem
		phrase string // what the report must say
		damage func(t *testing.T, dir string)
	}{
		{"image byte flipped", recs[1].ID, "SHA-256", func(t *testing.T, dir string) {
			p := filepath.Join(dir, recs[1].Image)
			b, err := os.ReadFile(p)
			if err != nil {
				t.Fatal(err)
			}
			b[len(b)/2] ^= 0xff
			if err := os.WriteFile(p, b, 0o644); err != nil {
				t.Fatal(err)
			}
		}},
		{"mask file missing", recs[2].ID, recs[2].Mask + ": does not exist", func(t *testing.T, dir string) {
			if err := os.Remove(filepath.Join(dir, recs[2].Mask)); err != nil {
				t.Fatal(err)
			}
		}},
		{"bbox edited", firstWithObjects(t, recs, 3).ID, "box", func(t *testing.T, dir string) {
			editRecord(t, dir, firstWithObjects(t, recs, 3).ID, func(r *manifest.Record) { r.Objects[0].Box[2]++ })
		}},
		// parts is a count target of every object (workshop-parts preset).
		{"count target disagrees with the instance mask", recs[4].ID, "target parts", func(t *testing.T, dir string) {
			editRecord(t, dir, recs[4].ID, func(r *manifest.Record) {
				r.Targets["parts"] = manifest.Number(r.Targets["parts"].Num + 1)
			})
		}},
		{"path with ..", recs[5].ID, "leaves the dataset folder", func(t *testing.T, dir string) {
			editRecord(t, dir, recs[5].ID, func(r *manifest.Record) { r.Image = "../" + r.Image })
		}},
		// Copies of one source must share a split (common practice: grouped
		// splits, so no source leaks between train and test).
		{"group split across splits", val.ID, "spans splits", func(t *testing.T, dir string) {
			editRecord(t, dir, val.ID, func(r *manifest.Record) { r.Group = train.Group })
		}},
		{"record moved to another split", train.ID, "is in split val, but seed 1's allocation", func(t *testing.T, dir string) {
			editRecord(t, dir, train.ID, func(r *manifest.Record) { r.Split = "val" })
		}},
		{"dataset.json missing (incomplete set)", "", "incomplete", func(t *testing.T, dir string) {
			if err := os.Remove(filepath.Join(dir, manifest.DatasetFile)); err != nil {
				t.Fatal(err)
			}
		}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "set")
			copyTree(t, pristine, dir)
			c.damage(t, dir)
			stdout, _ := wantCode(t, exitFailure, "verify", dir)
			for _, line := range strings.Split(stdout, "\n") {
				if strings.Contains(line, c.phrase) && (c.id == "" || strings.Contains(line, c.id)) {
					return
				}
			}
			t.Errorf("no report line names record %q and says %q:\n%s", c.id, c.phrase, stdout)
		})
	}
	t.Run("intact copy", func(t *testing.T) {
		dir := filepath.Join(t.TempDir(), "set")
		copyTree(t, pristine, dir)
		stdout, _ := wantCode(t, exitOK, "verify", dir)
		if !strings.Contains(stdout, "12 samples") {
			t.Errorf("verify printed %q", stdout)
		}
	})
}

func TestVerifyRegenerate(t *testing.T) {
	pristine := filepath.Join(t.TempDir(), "pristine")
	wantCode(t, exitOK, "generate", "--out", pristine, "--count", "12", "--quiet")
	recs := readRecords(t, pristine)

	t.Run("intact", func(t *testing.T) {
		stdout, _ := wantCode(t, exitOK, "verify", "--regenerate", pristine)
		if !strings.Contains(stdout, "every byte identical") {
			t.Errorf("verify --regenerate printed %q", stdout)
		}
	})

	t.Run("changed byte stops before regenerating", func(t *testing.T) {
		dir := filepath.Join(t.TempDir(), "set")
		copyTree(t, pristine, dir)
		p := filepath.Join(dir, recs[3].Image)
		b, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		b[len(b)/2] ^= 0x01
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		stdout, _ := wantCode(t, exitFailure, "verify", "--regenerate", dir)
		if !strings.Contains(stdout, recs[3].ID) || strings.Contains(stdout, "regenerated") {
			t.Errorf("plain verify should fail on %s before any regeneration:\n%s", recs[3].ID, stdout)
		}
	})

	// A consistent forgery: one pixel changed, re-encoded as a valid PNG, the
	// record's SHA-256 and dataset.json's manifest checksum updated. Plain
	// verify cannot tell; regenerating from recipe and seed can.
	t.Run("consistent forgery", func(t *testing.T) {
		dir := filepath.Join(t.TempDir(), "set")
		copyTree(t, pristine, dir)
		r := recs[6]
		p := filepath.Join(dir, r.Image)
		f, err := os.Open(p)
		if err != nil {
			t.Fatal(err)
		}
		m, err := png.Decode(f)
		f.Close()
		if err != nil {
			t.Fatal(err)
		}
		g, ok := m.(*image.Gray)
		if !ok {
			t.Fatalf("%s is a %T, want a gray image (workshop-parts is gray)", p, m)
		}
		g.Pix[0] ^= 0x80
		var buf bytes.Buffer
		if err := png.Encode(&buf, g); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
		editRecord(t, dir, r.ID, func(rec *manifest.Record) { rec.SHA256["image"] = manifest.SHA256Hex(buf.Bytes()) })
		refreshManifestSum(t, dir)
		wantCode(t, exitOK, "verify", dir)
		_, stderr := wantCode(t, exitFailure, "verify", "--regenerate", dir)
		if !strings.Contains(stderr, "regenerated bytes differ") {
			t.Errorf("verify --regenerate said %q", stderr)
		}
	})

	// The comparison itself: the first differing file, in path order.
	t.Run("firstDifference", func(t *testing.T) {
		dir := filepath.Join(t.TempDir(), "set")
		copyTree(t, pristine, dir)
		if got, err := firstDifference(pristine, dir); err != nil || got != "" {
			t.Fatalf("identical copies: firstDifference = %q, %v", got, err)
		}
		rel := recs[9].Mask
		b, err := os.ReadFile(filepath.Join(dir, rel))
		if err != nil {
			t.Fatal(err)
		}
		b[len(b)-1] ^= 0x01
		if err := os.WriteFile(filepath.Join(dir, rel), b, 0o644); err != nil {
			t.Fatal(err)
		}
		if got, err := firstDifference(pristine, dir); err != nil || got != rel {
			t.Errorf("one changed file: firstDifference = %q, %v; want %q", got, err, rel)
		}
		// A file only one side has is named with which side lacks it.
		extra := filepath.Join(t.TempDir(), "set")
		copyTree(t, pristine, extra)
		if err := os.WriteFile(filepath.Join(extra, "images", "zzz.png"), []byte("x"), 0o644); err != nil {
			t.Fatal(err)
		}
		if got, _ := firstDifference(pristine, extra); !strings.HasPrefix(got, "images/zzz.png (missing here") {
			t.Errorf("file only in the regenerated folder: %q", got)
		}
		if got, _ := firstDifference(extra, pristine); !strings.HasPrefix(got, "images/zzz.png (extra") {
			t.Errorf("file only in the checked folder: %q", got)
		}
	})
}

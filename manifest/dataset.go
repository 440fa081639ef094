package manifest

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"github.com/trueset/trueset/internal/safefile"
	"io"
	"os"
	"path/filepath"
	"strings"
)

// File names inside a dataset folder.
const (
	DatasetFile  = "dataset.json"
	ManifestFile = "manifest.jsonl"
	ImagesDir    = "images"
	MasksDir     = "masks"
	InstancesDir = "instances"
)

// Dataset is the content of dataset.json. It is written last and marks the
// dataset complete.
type Dataset struct {
	Format         string          `json:"format"`
	ToolVersion    string          `json:"tool_version"`
	Recipe         json.RawMessage `json:"recipe"`
	RecipeSHA256   string          `json:"recipe_sha256"`
	Seed           uint64          `json:"seed"`
	Count          int             `json:"count"`
	Width          int             `json:"width"`
	Height         int             `json:"height"`
	Mode           string          `json:"mode"` // "gray" or "rgb"
	Classes        []Class         `json:"classes"`
	Targets        []string        `json:"targets"`
	TargetDefs     []TargetDef     `json:"target_defs"`
	Splits         SplitTable      `json:"splits"`
	Augment        *AugmentInfo    `json:"augment,omitempty"`
	ManifestSHA256 string          `json:"manifest_sha256"`
	// Layout is present for the packed layout only (pack.go).
	Layout *Layout `json:"layout,omitempty"`
}

// AugmentInfo records how an augmented dataset was made from its source.
type AugmentInfo struct {
	Plan           json.RawMessage `json:"plan"` // the normalized plan
	PlanSHA256     string          `json:"plan_sha256"`
	Seed           uint64          `json:"seed"`
	Copies         int             `json:"copies"`
	Splits         []string        `json:"splits"`                  // the splits that got copies
	Source         string          `json:"source"`                  // "trueset" or "plain"
	SourceSHA256   string          `json:"source_sha256,omitempty"` // the source's manifest checksum
	SourceSamples  int             `json:"source_samples"`
	AllowedChanges bool            `json:"allow_label_change,omitempty"`
	Skipped        []string        `json:"skipped,omitempty"`
	// A plain folder's labels.csv columns by what columns.json says of
	// them: image properties carried as is, and columns it does not
	// declare; AcceptStale says copies may carry those stale (marked in
	// their records' stale_targets).
	ImageColumns      []string `json:"image_columns,omitempty"`
	UndeclaredColumns []string `json:"undeclared_columns,omitempty"`
	AcceptStale       bool     `json:"accept_stale_columns,omitempty"`
	// Fallbacks counts, per source split, what the cuts policy and the
	// label rules did to the copies (issue 12).
	Fallbacks map[string]*Fallbacks `json:"fallbacks,omitempty"`
}

// Fallbacks counts what happened to the copies of one split's sources:
// Planned copies (sources × --copies), Written, Redrawn (written copies
// drawn again at least once), Dropped (written copies that dropped objects
// cut below least_shown) and DroppedObjects, NotWritten (no draw within
// cuts.tries kept every reading whole, or every object where undeclared
// columns are carried) and Stale (written copies carrying undeclared
// columns marked stale).
type Fallbacks struct {
	Planned        int `json:"planned"`
	Written        int `json:"written"`
	Redrawn        int `json:"redrawn"`
	Dropped        int `json:"dropped"`
	DroppedObjects int `json:"dropped_objects"`
	NotWritten     int `json:"not_written"`
	Stale          int `json:"stale"`
}

// Add adds b's counts to f.
func (f *Fallbacks) Add(b Fallbacks) {
	f.Planned += b.Planned
	f.Written += b.Written
	f.Redrawn += b.Redrawn
	f.Dropped += b.Dropped
	f.DroppedObjects += b.DroppedObjects
	f.NotWritten += b.NotWritten
	f.Stale += b.Stale
}

// SplitTable holds the split ratios, the resulting sample counts, and the
// strata × splits table the allocation guarantees.
type SplitTable struct {
	Names    []string           `json:"names"`
	Spec     string             `json:"spec"` // the ratios as given, e.g. train=0.8,val=0.1,test=0.1
	Ratios   map[string]float64 `json:"ratios"`
	Counts   map[string]int     `json:"counts"`             // samples per split
	Stratify string             `json:"stratify,omitempty"` // the stratification key; "" = one stratum
	Strata   []Stratum          `json:"strata"`
	Thin     []string           `json:"thin_strata,omitempty"` // strata with fewer groups than splits
	// RequireCoverage: the table was rounded coverage first (Splits.Cover),
	// so verify and split recompute it that way.
	RequireCoverage bool `json:"require_coverage,omitempty"`
}

// Stratum is one row of the strata × splits table, counted in groups.
type Stratum struct {
	Key    string         `json:"key"`
	Groups int            `json:"groups"`
	Splits map[string]int `json:"splits"`
}

// SampleID is the id of sample index i: zero-padded so names sort in index order.
func SampleID(i int) string { return fmt.Sprintf("%06d", i) }

// SafeRel reports whether p is a relative, clean path that stays inside its
// folder (no absolute path, no "..", no backslash tricks).
func SafeRel(p string) bool {
	if p == "" || filepath.IsAbs(p) || strings.Contains(p, `\`) {
		return false
	}
	c := filepath.Clean(p)
	return c == p && c != "." && c != ".." && !strings.HasPrefix(c, "../")
}

// ResolveInside joins a record path to dir and refuses it when it leaves
// dir: an unsafe path (absolute, "..") or a symbolic link anywhere along it
// that resolves outside dir.
func ResolveInside(dir, rel string) (string, error) {
	if !SafeRel(rel) {
		return "", fmt.Errorf("path %q leaves the dataset folder", rel)
	}
	p := filepath.Join(dir, rel)
	root, err := filepath.EvalSymlinks(dir)
	if err != nil {
		return "", err
	}
	real, err := filepath.EvalSymlinks(p)
	if err != nil {
		return p, nil // missing files are reported by whoever opens them
	}
	if r, err := filepath.Rel(root, real); err != nil || r == ".." || strings.HasPrefix(r, "../") {
		return "", fmt.Errorf("path %q is a symbolic link to %s, outside the dataset folder", rel, real)
	}
	return p, nil
}

// SHA256Hex returns the lowercase hex SHA-256 of b (FIPS 180-4).
func SHA256Hex(b []byte) string {
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}

// WriteFileAtomic writes b to path through a temporary file in the same
// folder and renames it into place, so a reader never sees a half-written file.
func WriteFileAtomic(path string, b []byte) error { return writeAtomic(OS, path, b) }

// MarshalRecord encodes one manifest line (without the newline).
func MarshalRecord(r *Record) ([]byte, error) {
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetEscapeHTML(false)
	if err := enc.Encode(r); err != nil {
		return nil, fmt.Errorf("record %s: %w", r.ID, err)
	}
	return bytes.TrimRight(buf.Bytes(), "\n"), nil
}

// MarshalDataset encodes dataset.json, indented for people, ending in a newline.
func MarshalDataset(d *Dataset) ([]byte, error) {
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetEscapeHTML(false)
	enc.SetIndent("", "  ")
	if err := enc.Encode(d); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

// ReadDataset reads DIR/dataset.json.
func ReadDataset(dir string) (*Dataset, error) {
	p := filepath.Join(dir, DatasetFile)
	if _, err := os.Lstat(p); os.IsNotExist(err) {
		return nil, fmt.Errorf("%s: missing: the dataset is incomplete or not a trueset dataset", p)
	}
	b, err := safefile.Read(p, "dataset.json", MaxDatasetBytes)
	if err != nil {
		return nil, err
	}
	var d Dataset
	if err := json.Unmarshal(b, &d); err != nil {
		return nil, fmt.Errorf("%s: %w", p, err)
	}
	if err := CheckFormat(p, d.Format); err != nil {
		return nil, err
	}
	return &d, nil
}

// CheckFormat refuses a dataset.json or shard.json whose format field is not
// the one this version reads; file names it in the error.
func CheckFormat(file, format string) error {
	switch format {
	case Format:
		return nil
	case "":
		return fmt.Errorf("%s: format: missing; this trueset reads %q", file, Format)
	case "trueset-dataset/1":
		return fmt.Errorf("%s: format %q was written by an earlier trueset, whose key names differ; this one reads %q: generate the set again from its recipe and seed with this version, or read it with the version named in tool_version", file, format, Format)
	}
	return fmt.Errorf("%s: format %q is not one this trueset knows; it reads %q", file, format, Format)
}

// ReadManifest calls fn for every record of DIR/manifest.jsonl in order.
// Errors name the file and line.
func ReadManifest(dir string, fn func(*Record) error) error {
	p := filepath.Join(dir, ManifestFile)
	f, err := safefile.Open(p)
	if err != nil {
		return err
	}
	defer f.Close()
	return DecodeManifest(f, p, fn)
}

// DecodeManifest reads JSON Lines records from r; name is used in errors.
func DecodeManifest(r io.Reader, name string, fn func(*Record) error) error {
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 64*1024), MaxRecordBytes+1)
	line := 0
	for sc.Scan() {
		line++
		if len(bytes.TrimSpace(sc.Bytes())) == 0 {
			continue
		}
		var rec Record
		dec := json.NewDecoder(bytes.NewReader(sc.Bytes()))
		dec.DisallowUnknownFields()
		if err := dec.Decode(&rec); err != nil {
			return fmt.Errorf("%s:%d: %w", name, line, err)
		}
		if err := SafeName("record id", rec.ID); err != nil {
			return fmt.Errorf("%s:%d: %w", name, line, err)
		}
		for _, f := range [][2]string{{"image", rec.Image}, {"mask", rec.Mask}, {"instances", rec.Instances}} {
			if !SafeRel(f[1]) {
				return fmt.Errorf("%s:%d: record %q: path %q leaves the dataset folder", name, line, rec.ID, f[1])
			}
			if err := recordPath(f[0], f[1]); err != nil {
				return fmt.Errorf("%s:%d: record %q: %w", name, line, rec.ID, err)
			}
		}
		if err := fn(&rec); err != nil {
			return fmt.Errorf("%s:%d: %w", name, line, err)
		}
	}
	if err := sc.Err(); err != nil {
		return fmt.Errorf("%s:%d: %w", name, line+1, err)
	}
	return nil
}

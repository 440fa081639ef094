package manifest

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"unicode"
	"unicode/utf8"
)

// MaxSampleFileBytes bounds one image, mask or instance file read whole
// (a 4096×4096 RGB PNG stored without compression is about 50 MB).
const MaxSampleFileBytes = 256 << 20

// MaxDatasetBytes bounds dataset.json and shard.json (the recipe, the plan
// and the strata table are the large parts).
const MaxDatasetBytes = 64 << 20

// MaxRecordBytes bounds one manifest line: writers refuse a longer record
// and readers read up to this, so whatever trueset writes it can read back.
const MaxRecordBytes = 16 << 20

// MaxNameBytes bounds a name trueset turns into a file name (ids, stems).
const MaxNameBytes = 128

// SafeName checks that name, taken from input data (a record id, a file
// stem, a class or shard name), is a plain file-name component that cannot
// lead anywhere else: not empty, at most MaxNameBytes of valid UTF-8, no
// path separator of any system (/ \ :), no control or wildcard character
// (* ? " < > |), not "." or "..", not starting with "." (hidden and
// temporary files) or "-" (read as a flag), not ending in a space or a dot.
// Every command calls it before it builds a path from such a name; what
// names the kind of name in the error ("record id", "file stem").
func SafeName(what, name string) error {
	bad := func(why string) error { return fmt.Errorf("%s %q is not a safe file name: %s", what, name, why) }
	switch {
	case name == "":
		return fmt.Errorf("%s is empty", what)
	case len(name) > MaxNameBytes:
		return bad(fmt.Sprintf("%d bytes; at most %d", len(name), MaxNameBytes))
	case !utf8.ValidString(name):
		return bad("not valid UTF-8")
	case name == "." || name == "..":
		return bad("it names a folder")
	case name[0] == '.':
		return bad(`it starts with "."`)
	case name[0] == '-':
		return bad(`it starts with "-"`)
	case strings.HasSuffix(name, " ") || strings.HasSuffix(name, "."):
		return bad("it ends in a space or a dot")
	}
	for _, r := range name {
		if unicode.IsControl(r) || strings.ContainsRune(`/\:*?"<>|`, r) {
			return bad(fmt.Sprintf("it holds %q", r))
		}
	}
	return nil
}

// recordPath checks that a record's path for kind ("image", "mask",
// "instances") is exactly DIR/<name> inside that kind's folder, <name> a
// safe file name: a record can point only at its own sample files, never at
// dataset.json, the manifest or another folder.
func recordPath(kind, p string) error {
	dir := map[string]string{"image": ImagesDir, "mask": MasksDir, "instances": InstancesDir}[kind]
	name, ok := strings.CutPrefix(p, dir+"/")
	if !ok || !SafeRel(p) {
		return fmt.Errorf("%s path %q is not a file under %s/", kind, p, dir)
	}
	if err := SafeName(kind+" file name", name); err != nil {
		return fmt.Errorf("%s path %q: %w", kind, p, err)
	}
	return nil
}

// OverlapError is an output folder that overlaps an input (a usage error).
type OverlapError struct{ msg string }

func (e *OverlapError) Error() string { return e.msg }

// CheckDisjoint refuses an output folder that is an input, lies inside one,
// or contains one (writing it could empty or overwrite what is being read).
// Paths are compared after resolving symbolic links of their existing part.
func CheckDisjoint(out string, inputs ...string) error {
	o, err := realPath(out)
	if err != nil {
		return err
	}
	for _, in := range inputs {
		i, err := realPath(in)
		if err != nil {
			return err
		}
		switch {
		case o == i:
			return &OverlapError{fmt.Sprintf("output folder %s is the input %s; write to a new folder", out, in)}
		case within(o, i):
			return &OverlapError{fmt.Sprintf("output folder %s is inside the input %s; write to a folder outside it", out, in)}
		case within(i, o):
			return &OverlapError{fmt.Sprintf("output folder %s contains the input %s; write to a folder that does not hold it", out, in)}
		}
	}
	return nil
}

// within reports whether p lies strictly inside dir (both absolute, clean).
func within(p, dir string) bool {
	r, err := filepath.Rel(dir, p)
	return err == nil && r != "." && r != ".." && !strings.HasPrefix(r, "../")
}

// realPath makes p absolute and resolves symbolic links in its longest
// existing prefix (the rest may not exist yet).
func realPath(p string) (string, error) {
	a, err := filepath.Abs(p)
	if err != nil {
		return "", err
	}
	rest := ""
	for {
		if r, err := filepath.EvalSymlinks(a); err == nil {
			return filepath.Join(r, rest), nil
		} else if !os.IsNotExist(err) {
			return "", err
		}
		parent := filepath.Dir(a)
		if parent == a {
			return filepath.Join(a, rest), nil
		}
		rest = filepath.Join(filepath.Base(a), rest)
		a = parent
	}
}

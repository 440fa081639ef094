package manifest

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestSafeName(t *testing.T) {
	for _, ok := range []string{"000000", "a-c01", "plate_7", "Zählung", "a.b"} {
		if err := SafeName("record id", ok); err != nil {
			t.Errorf("%q refused: %v", ok, err)
		}
	}
	for name, why := range map[string]string{
		"":                       "empty",
		"../x":                   `starts with "."`,
		"/etc/passwd":            `'/'`,
		`a\b`:                    `'\\'`,
		"c:x":                    `':'`,
		".":                      "names a folder",
		"..":                     "names a folder",
		".hidden":                `starts with "."`,
		"-rf":                    `starts with "-"`,
		"a ":                     "ends in a space",
		"a\x00b":                 `'\x00'`,
		"a\nb":                   `'\n'`,
		"\xff":                   "UTF-8",
		strings.Repeat("a", 129): "at most 128",
	} {
		err := SafeName("record id", name)
		if err == nil || !strings.Contains(err.Error(), why) {
			t.Errorf("%q: got %v, want a refusal mentioning %s", name, err, why)
		}
	}
}

// A record can point only at its own files: an id that is a path, or a
// path naming dataset.json, the manifest or another folder, is refused by
// the reader every command uses, with the file and line.
func TestDecodeManifestRefusesUnsafeRecords(t *testing.T) {
	const ok = `{"id":"000000","index":0,"split":"train","group":"000000","stratum":"all","width":4,"height":4,"image":"images/000000.png","mask":"masks/000000.png","instances":"instances/000000.png","sha256":{},"objects":[],"targets":{}}`
	for name, c := range map[string]struct{ old, new, want string }{
		"id with ..":             {`"id":"000000"`, `"id":"../../victim"`, `record id "../../victim"`},
		"absolute id":            {`"id":"000000"`, `"id":"/tmp/x"`, `record id "/tmp/x"`},
		"image is dataset.json":  {`"image":"images/000000.png"`, `"image":"dataset.json"`, `image path "dataset.json" is not a file under images/`},
		"mask in images":         {`"mask":"masks/000000.png"`, `"mask":"images/000000.png"`, "not a file under masks/"},
		"instances in subfolder": {`"instances":"instances/000000.png"`, `"instances":"instances/a/b.png"`, "not a safe file name"},
	} {
		line := strings.Replace(ok, c.old, c.new, 1)
		err := DecodeManifest(strings.NewReader(ok+"\n"+line+"\n"), "m.jsonl", func(*Record) error { return nil })
		if err == nil || !strings.Contains(err.Error(), c.want) || !strings.HasPrefix(err.Error(), "m.jsonl:2:") {
			t.Errorf("%s: got %v, want m.jsonl:2: ... %s", name, err, c.want)
		}
	}
}

func TestCheckDisjoint(t *testing.T) {
	root := t.TempDir()
	in := filepath.Join(root, "in")
	os.MkdirAll(filepath.Join(in, "images"), 0o755)
	alias := filepath.Join(root, "alias")
	os.Symlink(in, alias)
	for out, want := range map[string]string{
		in:                                 "is the input",
		alias:                              "is the input",
		filepath.Join(in, "images", "new"): "is inside the input",
		filepath.Join(alias, "new"):        "is inside the input",
		root:                               "contains the input",
		filepath.Join(root, "sibling"):     "",
		filepath.Join(root, "in2"):         "",
	} {
		err := CheckDisjoint(out, in)
		if want == "" && err != nil || want != "" && (err == nil || !strings.Contains(err.Error(), want)) {
			t.Errorf("out %s: got %v, want %q", out, err, want)
		}
	}
}

// Writer and reader agree: a record longer than a reader takes is refused
// when written, naming the record.
func TestAppendRefusesARecordReadersCannotRead(t *testing.T) {
	w, err := Create(filepath.Join(t.TempDir(), "out"), false)
	if err != nil {
		t.Fatal(err)
	}
	defer w.Abort()
	big := &Record{ID: "000007", Objects: []Object{{ClassName: strings.Repeat("x", MaxRecordBytes)}}}
	if err := w.Append(big); err == nil || !strings.Contains(err.Error(), "record 000007") || !strings.Contains(err.Error(), "at most") {
		t.Errorf("got %v", err)
	}
	ok := &Record{ID: "000000", Objects: []Object{}}
	if err := w.Append(ok); err != nil {
		t.Errorf("a small record: %v", err)
	}
}

package manifest

import (
	"archive/tar"
	"encoding/json"
	"strings"
	"testing"
)

// TestMemberBytes holds memberBytes' one-block shortcut to what
// archive/tar actually writes (the reference: the standard library's
// writer, counted), for names around the ustar name field's 100 bytes and
// names that need a pax header (non-ASCII), and data sizes around the
// 512-byte block.
func TestMemberBytes(t *testing.T) {
	for _, name := range []string{"images/000000.png", "records/" + strings.Repeat("a", 87) + ".json", "records/" + strings.Repeat("a", 88) + ".json",
		"images/" + strings.Repeat("b", 200) + ".png", "images/é.png"} {
		for _, size := range []int{0, 1, 511, 512, 513, 4096} {
			b := make([]byte, size)
			got, err := memberBytes(name, b)
			if err != nil {
				t.Fatal(err)
			}
			c := &countOnly{}
			tw := tar.NewWriter(c)
			if err := tw.WriteHeader(header(name, b)); err != nil {
				t.Fatal(err)
			}
			tw.Write(b)
			tw.Flush()
			if got != c.n {
				t.Errorf("name of %d bytes, %d bytes of data: memberBytes %d, archive/tar writes %d", len(name), size, got, c.n)
			}
		}
	}
}

// TestIndexEntryJSON holds the index line's hand-written encoder to
// encoding/json (the reference), for plain ids and ids with characters
// json.Marshal escapes or writes as UTF-8.
func TestIndexEntryJSON(t *testing.T) {
	for _, id := range []string{"000001", "a&b", "x<y>z", "é-ü", "seed-7_copy 3", "000001-c02"} {
		e := IndexEntry{ID: id, Split: "train", Pack: PackName("train", 3), At: [2]int64{1024, 99999999999}}
		for i, n := range MemberNames(id) {
			e.Files[i] = IndexedFile{Name: n, Off: int64(1536 + i*512), Size: int64(i * 1000)}
		}
		want, err := json.Marshal(&e)
		if err != nil {
			t.Fatal(err)
		}
		if got := e.appendJSON(nil); string(got) != string(want) {
			t.Errorf("id %q:\n got %s\nwant %s", id, got, want)
		}
	}
}

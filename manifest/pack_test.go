package manifest

import (
	"archive/tar"
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

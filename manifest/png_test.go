package manifest

import (
	"bytes"
	"encoding/binary"
	"image"
	"image/png"
	"testing"
)

// ihdr returns bit depth and colour type from a PNG's IHDR chunk, which the
// PNG specification (ISO/IEC 15948, §11.2.2) places right after the 8-byte
// signature: length(4) "IHDR"(4) width(4) height(4) depth(1) colour type(1).
func ihdr(t *testing.T, b []byte) (w, h uint32, depth, ctype byte) {
	t.Helper()
	if !bytes.Equal(b[:8], []byte("\x89PNG\r\n\x1a\n")) || string(b[12:16]) != "IHDR" {
		t.Fatalf("not a PNG with a leading IHDR: % x", b[:16])
	}
	return binary.BigEndian.Uint32(b[16:]), binary.BigEndian.Uint32(b[20:]), b[24], b[25]
}

func TestMaskAndInstanceFormats(t *testing.T) {
	classes := []Class{{ID: 0, Name: "background"}, {ID: 1, Name: "a", Colour: [3]uint8{255, 0, 0}}, {ID: 2, Name: "b", Colour: [3]uint8{0, 255, 0}}}
	mask := image.NewPaletted(image.Rect(0, 0, 3, 2), Palette(classes))
	mask.Pix = []uint8{0, 1, 2, 2, 1, 0}
	inst := image.NewGray16(image.Rect(0, 0, 3, 2))
	inst.SetGray16(2, 1, struct{ Y uint16 }{300})
	enc := NewEncoder()

	b, err := enc.Encode(mask)
	if err != nil {
		t.Fatal(err)
	}
	b = append([]byte(nil), b...)
	if w, h, depth, ctype := ihdr(t, b); w != 3 || h != 2 || depth != 8 || ctype != 3 {
		t.Fatalf("mask IHDR %dx%d depth %d colour type %d; want 3x2, 8-bit indexed (type 3)", w, h, depth, ctype)
	}
	m, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	pm := m.(*image.Paletted)
	if !bytes.Equal(pm.Pix, mask.Pix) {
		t.Fatalf("class ids %v, want %v", pm.Pix, mask.Pix)
	}
	if r, g, _, _ := pm.Palette[1].RGBA(); r>>8 != 255 || g != 0 {
		t.Fatalf("palette entry 1 is not class a's colour")
	}

	b, err = enc.Encode(inst)
	if err != nil {
		t.Fatal(err)
	}
	if _, _, depth, ctype := ihdr(t, b); depth != 16 || ctype != 0 {
		t.Fatalf("instances IHDR depth %d colour type %d; want 16-bit gray (type 0)", depth, ctype)
	}
	g, _ := png.Decode(bytes.NewReader(b))
	if g.(*image.Gray16).Gray16At(2, 1).Y != 300 {
		t.Fatal("instance id 300 did not survive the round trip")
	}
}

// Instance ids, areas and boxes of a tiny literal mask, checkable by eye:
//
//	0 1 1
//	0 1 2
//
// id 1: area 3, box [1,0,3,2]; id 2: area 1, box [2,1,3,2].
func TestMeasureInstancesLiteral(t *testing.T) {
	m := image.NewGray16(image.Rect(0, 0, 3, 2))
	for i, v := range []uint16{0, 1, 1, 0, 1, 2} {
		m.SetGray16(i%3, i/3, struct{ Y uint16 }{v})
	}
	s := MeasureInstances(m)
	if len(s) != 2 || s[1].Area != 3 || s[1].BBox != [4]int{1, 0, 3, 2} || s[2].Area != 1 || s[2].BBox != [4]int{2, 1, 3, 2} {
		t.Fatalf("got %+v %+v", s[1], s[2])
	}
}

package augment

// Checks that keep augment from trusting its input: the PNG header reader
// that checks a record's size against its files, the JPEG scan counter that
// bounds decode work, the pixel budget that bounds a whole run's memory, the
// names a run writes, and the largest canvas a plan can make.

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"strings"
	"sync"

	"github.com/trueset/trueset/manifest"
)

// InputError is an input refused because of what it holds (a record, a
// file, a name, a plan bound): the input must change before a run can work,
// so resuming would fail the same way.
type InputError struct{ Err error }

func (e *InputError) Error() string { return e.Err.Error() }
func (e *InputError) Unwrap() error { return e.Err }

// ResumeError is --resume refused because the output folder holds a
// finished dataset that is not this run's (another plan, seed, options or
// input): the caller named the wrong folder or options.
type ResumeError struct{ Err error }

func (e *ResumeError) Error() string { return e.Err.Error() }
func (e *ResumeError) Unwrap() error { return e.Err }

func inputErrorf(format string, args ...any) error {
	return &InputError{fmt.Errorf(format, args...)}
}

// pngHeader is what a PNG's IHDR chunk says.
type pngHeader struct {
	Width, Height    int
	Depth, ColorType byte
}

// pngHeaderBytes is how much of a file readPNGHeader needs: the 8-byte
// signature and the IHDR chunk (length 4, type 4, data 13, CRC 4).
const pngHeaderBytes = 8 + 4 + 4 + 13 + 4

// parsePNGHeader reads the signature and IHDR chunk at the start of b, as
// the PNG standard (ISO/IEC 15948:2004 / W3C PNG 2nd ed.) lays them out:
// §5.2 signature 89 50 4E 47 0D 0A 1A 0A; §5.6 IHDR first; §11.2.2 its 13
// bytes: width and height (4-byte big-endian, 1..2^31−1), bit depth, color
// type, compression method 0, filter method 0, interlace method 0 or 1,
// with the allowed depths per color type; §5.3 the chunk CRC (CRC-32 of type
// and data, the ISO 3309 polynomial that hash/crc32.IEEE implements).
func parsePNGHeader(b []byte) (pngHeader, error) {
	var h pngHeader
	if len(b) < pngHeaderBytes {
		return h, errors.New("not a PNG: shorter than a PNG signature and header chunk")
	}
	if string(b[:8]) != "\x89PNG\r\n\x1a\n" {
		return h, errors.New("not a PNG: no PNG signature")
	}
	if binary.BigEndian.Uint32(b[8:12]) != 13 || string(b[12:16]) != "IHDR" {
		return h, errors.New("corrupt PNG: the first chunk is not a 13-byte IHDR")
	}
	if crc32.ChecksumIEEE(b[12:29]) != binary.BigEndian.Uint32(b[29:33]) {
		return h, errors.New("corrupt PNG: the header chunk's CRC does not match")
	}
	w, ht := binary.BigEndian.Uint32(b[16:20]), binary.BigEndian.Uint32(b[20:24])
	if w == 0 || ht == 0 || w > math.MaxInt32 || ht > math.MaxInt32 {
		return h, fmt.Errorf("corrupt PNG: the header gives a size of %d×%d", w, ht)
	}
	h = pngHeader{Width: int(w), Height: int(ht), Depth: b[24], ColorType: b[25]}
	depths := map[byte]string{0: "\x01\x02\x04\x08\x10", 2: "\x08\x10", 3: "\x01\x02\x04\x08", 4: "\x08\x10", 6: "\x08\x10"}
	ok, known := depths[h.ColorType]
	if !known {
		return h, fmt.Errorf("corrupt PNG: color type %d does not exist", h.ColorType)
	}
	if !strings.ContainsRune(ok, rune(h.Depth)) {
		return h, fmt.Errorf("corrupt PNG: bit depth %d is not allowed with color type %d", h.Depth, h.ColorType)
	}
	if b[26] != 0 || b[27] != 0 || b[28] > 1 {
		return h, errors.New("corrupt PNG: unknown compression, filter or interlace method")
	}
	return h, nil
}

// JPEG decode work. Go's progressive decoder walks every block of a scan's
// components once per scan, so the work of a file is about its scans times
// its pixels. libjpeg's standard progressive script has 10 scans for a color
// image and 6 for a gray one (jcparam.c, jpeg_simple_progression; from
// memory), and a baseline image one scan per component at most.
const (
	// maxJPEGScans is the most scans (SOS markers) a JPEG may hold.
	maxJPEGScans = 100
	// maxJPEGWork bounds scans × pixels: a 64-megapixel image may have 32
	// scans, a 1-megapixel one the full 100.
	maxJPEGWork = 1 << 31
)

// countJPEGScans counts the start-of-scan markers of a JPEG stream up to its
// end-of-image marker, following ITU-T T.81 (ISO/IEC 10918-1) §B.1.1: a
// marker is 0xFF followed by a code; 0xFF bytes before a code are fill
// (§B.1.1.2); SOI, EOI, TEM and RST0..7 stand alone and every other marker
// has a 2-byte big-endian length that counts itself (§B.1.1.4); after an SOS
// segment comes entropy-coded data, in which 0xFF is followed by 0x00 (a
// stuffed byte, §F.1.2.3) or RSTn, and any other code ends the data. It stops
// with an error as soon as more than limit scans are seen, so a file with
// thousands of scans costs one pass over its bytes and no decoding.
func countJPEGScans(r io.Reader, limit int) (int, error) {
	br := bufio.NewReader(r)
	var b2 [2]byte
	if _, err := io.ReadFull(br, b2[:]); err != nil || b2 != [2]byte{0xFF, 0xD8} {
		return 0, errors.New("not a JPEG: no start-of-image marker")
	}
	scans := 0
	inScan := false
	for {
		c, err := br.ReadByte()
		if err != nil {
			return scans, nil // a truncated file: the decoder says so
		}
		if c != 0xFF {
			if inScan {
				continue // entropy-coded data
			}
			return scans, fmt.Errorf("corrupt JPEG: byte 0x%02X where a marker should be", c)
		}
		// Skip fill bytes to the marker code.
		for c == 0xFF {
			if c, err = br.ReadByte(); err != nil {
				return scans, nil
			}
		}
		switch {
		case c == 0x00 && inScan, c >= 0xD0 && c <= 0xD7 && inScan:
			continue // a stuffed 0xFF or a restart marker inside the scan
		case c == 0xD9:
			return scans, nil // EOI
		case c == 0x00, c == 0x01, c >= 0xD0 && c <= 0xD8:
			inScan = false
			continue // stand-alone markers
		}
		inScan = false
		if _, err := io.ReadFull(br, b2[:]); err != nil {
			return scans, nil
		}
		n := int(binary.BigEndian.Uint16(b2[:]))
		if n < 2 {
			return scans, fmt.Errorf("corrupt JPEG: marker 0xFF%02X has a length of %d", c, n)
		}
		if _, err := br.Discard(n - 2); err != nil {
			return scans, nil
		}
		if c == 0xDA {
			scans++
			if scans > limit {
				return scans, fmt.Errorf("more than %d scans", limit)
			}
			inScan = true
		}
	}
}

// jpegScanLimit is the most scans a w×h JPEG may have.
func jpegScanLimit(w, h int) int {
	px := int64(w) * int64(h)
	if px < 1 {
		px = 1
	}
	return int(min(int64(maxJPEGScans), max(1, maxJPEGWork/px)))
}

// pixelBudget bounds the pixels a run works on at once: a worker takes a
// source's weight (its pixels plus the largest canvas the plan can make of
// it) before it decodes the source and gives it back when the source's
// copies are written. A weight above the whole budget waits for the budget
// to be free and then runs alone, so any source can run, one at a time.
type pixelBudget struct {
	mu    sync.Mutex
	cond  *sync.Cond
	total int64
	used  int64
}

func newPixelBudget(total int64) *pixelBudget {
	b := &pixelBudget{total: max(total, 1)}
	b.cond = sync.NewCond(&b.mu)
	return b
}

// take waits until n pixels fit and takes them; it returns what to give back.
func (b *pixelBudget) take(n int64) int64 {
	n = min(max(n, 1), b.total)
	b.mu.Lock()
	for b.used+n > b.total {
		b.cond.Wait()
	}
	b.used += n
	b.mu.Unlock()
	return n
}

func (b *pixelBudget) give(n int64) {
	b.mu.Lock()
	b.used -= n
	b.mu.Unlock()
	b.cond.Broadcast()
}

// copyID is the id of copy k of source id.
func copyID(id string, k, digits int) string { return fmt.Sprintf("%s-c%0*d", id, digits, k) }

// copyDigits is the width of the copy number for n copies (at least 2).
func copyDigits(copies int) int { return max(2, len(fmt.Sprint(max(copies, 1)))) }

// checkOutputNames refuses, before anything is written, a set of sources
// whose output names would clash: two sources with one id (or ids that
// differ only in letter case, which are one file on the case-insensitive
// file systems of macOS and Windows), a source whose id is the name of
// another source's copy (sources "a" and "a-c01"), or a copy id longer than
// manifest.MaxNameBytes. where(i) names source i's file or manifest line.
func checkOutputNames(ids []string, gets func(i int) bool, copies int, where func(i int) string) error {
	digits := copyDigits(copies)
	at := make(map[string]int, len(ids))
	for i, id := range ids {
		if err := manifest.SafeName("id", id); err != nil {
			return inputErrorf("%s: %v", where(i), err)
		}
		k := strings.ToLower(id)
		if j, dup := at[k]; dup {
			if ids[j] == id {
				return inputErrorf("%s and %s: both have id %q; ids must be unique", where(j), where(i), id)
			}
			return inputErrorf("%s and %s: ids %q and %q differ only in letter case, so their files would be one on case-insensitive file systems; rename one", where(j), where(i), ids[j], id)
		}
		at[k] = i
	}
	if copies == 0 {
		return nil
	}
	for i, id := range ids {
		if !gets(i) {
			continue
		}
		if n := len(copyID(id, copies, digits)); n > manifest.MaxNameBytes {
			return inputErrorf("%s: id %q is %d bytes; its copies' ids (%s) would be %d bytes, over the %d a file name may have; shorten it",
				where(i), id, len(id), copyID("…", copies, digits), n, manifest.MaxNameBytes)
		}
	}
	// A copy id is <id>-c<digits digits>: look for sources named that way
	// whose stem is a source that gets copies.
	for i, id := range ids {
		base, num, ok := strings.Cut(strings.ToLower(id), "-c")
		for ok {
			if len(num) == digits && strings.Trim(num, "0123456789") == "" {
				k := 0
				fmt.Sscan(strings.TrimLeft(num, "0"), &k)
				if j, found := at[base]; found && k >= 1 && k <= copies && gets(j) {
					return inputErrorf("%s: id %q is the name of copy %d of %s (id %q), so writing that copy would overwrite it; rename one of them",
						where(i), id, k, where(j), ids[j])
				}
			}
			var more string
			more, num, ok = strings.Cut(num, "-c")
			base = base + "-c" + more
		}
	}
	return nil
}

// canvasBound walks a plan's moves from a w×h source and returns the largest
// width and height any draw can give (steps with a chance below 1 both
// applied and not; of a pick, every choice). over names the first rotate
// with grow_canvas that can make a side over MaxSide by its step path
// (geometry.moves[i], or …from[j] inside a pick), and side that side.
func (p *Plan) canvasBound(w, h int) (bw, bh int, over string, side int) {
	var one func(s *Step, sp string, w, h int) (int, int)
	one = func(s *Step, sp string, w, h int) (int, int) {
		if *s.Chance == 0 {
			return w, h
		}
		nw, nh := w, h
		switch s.Do {
		case "pick":
			for j := range s.From {
				cw, ch := one(&s.From[j], fmt.Sprintf("%s.from[%d]", sp, j), w, h)
				if j == 0 {
					nw, nh = cw, ch
				} else {
					nw, nh = max(nw, cw), max(nh, ch)
				}
			}
		case "rotate":
			if s.GrowCanvas && s.Angle != nil {
				nw, nh = rotateBound(w, h, s.Angle.Min, s.Angle.Max)
				if (nw > MaxSide || nh > MaxSide) && over == "" {
					over, side = sp, max(nw, nh)
				}
			}
		case "crop", "resize":
			if len(s.To) == 2 {
				nw, nh = s.To[0], s.To[1]
			}
		}
		if *s.Chance < 1 {
			nw, nh = max(nw, w), max(nh, h)
		}
		return nw, nh
	}
	bw, bh = w, h
	for i := range p.Geometry.Moves {
		bw, bh = one(&p.Geometry.Moves[i], fmt.Sprintf("geometry.moves[%d]", i), bw, bh)
	}
	return bw, bh, over, side
}

// rotateBound is the largest canvas RotateCanvas makes of a w×h source for
// an angle in [lo, hi] degrees. Each side, w·|cos θ| + h·|sin θ| or
// w·|sin θ| + h·|cos θ|, is a sinusoid within each quarter turn, whose
// largest value on an interval is at an end, at a multiple of 90°, or where
// tan θ = h/w (or w/h) (calculus; common practice).
func rotateBound(w, h int, lo, hi float64) (int, int) {
	cands := []float64{lo, hi}
	t1 := math.Atan2(float64(h), float64(w)) * 180 / math.Pi
	t2 := math.Atan2(float64(w), float64(h)) * 180 / math.Pi
	for k := math.Floor(lo/90) - 1; k <= math.Ceil(hi/90)+1; k++ {
		for _, a := range []float64{k * 90, k*90 + t1, k*90 + t2, k*90 - t1, k*90 - t2} {
			if a > lo && a < hi {
				cands = append(cands, a)
			}
		}
	}
	bw, bh := w, h
	for _, a := range cands {
		_, ow, oh := RotateCanvas(float64(w), float64(h), a, true)
		bw, bh = max(bw, ow), max(bh, oh)
	}
	return bw, bh
}

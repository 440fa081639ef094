package readback

import (
	"archive/zip"
	"bytes"
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"codeberg.org/sbinet/npyio/npy"

	"github.com/trueset/trueset/internal/safefile"
)

// Limits bound what ReadBatch accepts from an .npz file, checked before
// the memory is allocated.
const (
	MaxBatchFileBytes  = 4 << 30 // the .npz file itself
	MaxEntries         = 256     // arrays in the archive
	MaxArrayBytes      = 2 << 30 // one array's .npy data, uncompressed
	MaxTotalBytes      = 4 << 30 // all arrays, uncompressed
	MaxHeaderBytes     = 1 << 16 // one .npy header
	MaxDims            = 5
	MaxBatchSamples    = 1 << 16
	MaxStringItemBytes = 4096 // one id string (U or S item)
)

// Array is one array of a batch, converted for reading: numbers as float64
// in C (row-major) order, strings as Go strings.
type Array struct {
	Name  string
	Shape []int
	DType string // the .npy descr, e.g. "<f4", "|u1", "<U6"
	Kind  byte   // 'b', 'i', 'u', 'f' (numbers) or 'U', 'S' (strings)
	Num   []float32
	Str   []string
}

// Float reports whether the array's dtype is a floating-point one.
func (a *Array) Float() bool { return a.Kind == 'f' }

// InputError is a batch file or array trueset cannot read or understand.
type InputError struct {
	File string
	Msg  string
}

func (e *InputError) Error() string { return e.File + ": " + e.Msg }

// ReadBatch reads every array of the .npz file at path through safefile,
// with the bounds of Limits.
func ReadBatch(path string) (map[string]*Array, []string, error) {
	bad := func(format string, args ...any) error {
		return &InputError{File: path, Msg: fmt.Sprintf(format, args...)}
	}
	f, err := safefile.Open(path)
	if err != nil {
		return nil, nil, err
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, nil, bad("%v", err)
	}
	if st.Size() > MaxBatchFileBytes {
		return nil, nil, bad("batch file is %d bytes; at most %d allowed", st.Size(), int64(MaxBatchFileBytes))
	}
	zr, err := zip.NewReader(f, st.Size())
	if err != nil {
		return nil, nil, bad("not an .npz file (NumPy's zip of .npy arrays): %v", err)
	}
	if len(zr.File) > MaxEntries {
		return nil, nil, bad("%d entries; at most %d allowed", len(zr.File), MaxEntries)
	}
	var total uint64
	for _, zf := range zr.File {
		if zf.UncompressedSize64 > MaxArrayBytes {
			return nil, nil, bad("entry %s is %d bytes uncompressed; at most %d allowed", zf.Name, zf.UncompressedSize64, int64(MaxArrayBytes))
		}
		total += zf.UncompressedSize64
	}
	if total > MaxTotalBytes {
		return nil, nil, bad("entries add up to %d bytes uncompressed; at most %d allowed", total, int64(MaxTotalBytes))
	}
	out := map[string]*Array{}
	var names []string
	for _, zf := range zr.File {
		name := strings.TrimSuffix(zf.Name, ".npy")
		if _, dup := out[name]; dup {
			return nil, nil, bad("array %q appears twice", name)
		}
		a, err := readEntry(zf)
		if err != nil {
			return nil, nil, bad("array %q: %v", name, err)
		}
		a.Name = name
		out[name] = a
		names = append(names, name)
	}
	return out, names, nil
}

// readEntry reads one .npy entry: its declared size (bounded above) is
// allocated once, and a stream longer or shorter than declared is refused.
func readEntry(zf *zip.File) (*Array, error) {
	rc, err := zf.Open()
	if err != nil {
		return nil, err
	}
	defer rc.Close()
	size := int(zf.UncompressedSize64)
	buf := make([]byte, size)
	if _, err := io.ReadFull(rc, buf); err != nil {
		return nil, fmt.Errorf("shorter than its declared %d bytes: %v", size, err)
	}
	var one [1]byte
	if n, _ := rc.Read(one[:]); n > 0 {
		return nil, fmt.Errorf("longer than its declared %d bytes", size)
	}
	return parseNPY(buf)
}

// parseNPY checks the .npy header (magic, version, header length, dtype,
// shape × item size against the data present) and converts the data.
func parseNPY(b []byte) (a *Array, err error) {
	if len(b) < 10 || string(b[:6]) != "\x93NUMPY" {
		return nil, fmt.Errorf("not a .npy array (no NUMPY magic)")
	}
	var hl, off int
	switch b[6] {
	case 1:
		hl, off = int(binary.LittleEndian.Uint16(b[8:10])), 10
	case 2, 3:
		if len(b) < 12 {
			return nil, fmt.Errorf("truncated .npy header")
		}
		v := binary.LittleEndian.Uint32(b[8:12])
		if v > MaxHeaderBytes {
			return nil, fmt.Errorf(".npy header of %d bytes; at most %d allowed", v, MaxHeaderBytes)
		}
		hl, off = int(v), 12
	default:
		return nil, fmt.Errorf(".npy version %d.%d is not one NumPy documents", b[6], b[7])
	}
	if off+hl > len(b) {
		return nil, fmt.Errorf("truncated .npy header")
	}
	// npyio parses the header dictionary; a malformed one must not take the
	// process down with it.
	defer func() {
		if r := recover(); r != nil {
			a, err = nil, fmt.Errorf("unreadable .npy header")
		}
	}()
	r, err := npy.NewReader(bytes.NewReader(b[:off+hl]))
	if err != nil {
		return nil, fmt.Errorf("unreadable .npy header: %v", err)
	}
	h := r.Header.Descr
	kind, order, item, err := parseDType(h.Type)
	if err != nil {
		return nil, err
	}
	if len(h.Shape) > MaxDims {
		return nil, fmt.Errorf("%d dimensions; at most %d", len(h.Shape), MaxDims)
	}
	n := 1
	for _, d := range h.Shape {
		if d < 0 || (d > 0 && n > math.MaxInt32/d) {
			return nil, fmt.Errorf("shape %v is out of range", h.Shape)
		}
		n *= d
	}
	data := b[off+hl:]
	if int64(n)*int64(item) != int64(len(data)) {
		return nil, fmt.Errorf("shape %v of %s (%d bytes each) needs %d bytes of data; the entry has %d", h.Shape, h.Type, item, int64(n)*int64(item), len(data))
	}
	a = &Array{Shape: append([]int(nil), h.Shape...), DType: strings.Trim(strings.TrimSpace(h.Type), "'\""), Kind: kind}
	if kind == 'U' || kind == 'S' {
		a.Str = decodeStrings(data, kind, order, item, n)
	} else {
		a.Num = decodeNumbers(data, kind, order, item, n)
	}
	if h.Fortran && len(a.Shape) > 1 {
		a.toC()
	}
	return a, nil
}

// parseDType reads a simple .npy descr: byte order, kind, item size.
// Structured, object and date types are refused.
func parseDType(t string) (kind byte, order binary.ByteOrder, item int, err error) {
	t = strings.Trim(strings.TrimSpace(t), "'\"")
	if len(t) < 2 {
		return 0, nil, 0, fmt.Errorf("dtype %q is not one trueset reads", t)
	}
	order = binary.LittleEndian
	switch t[0] {
	case '>':
		order = binary.BigEndian
		t = t[1:]
	case '<', '|', '=':
		t = t[1:]
	}
	kind = t[0]
	size, err := strconv.Atoi(t[1:])
	if err != nil || size <= 0 {
		return 0, nil, 0, fmt.Errorf("dtype %q is not one trueset reads", t)
	}
	switch kind {
	case 'b':
		if size == 1 {
			return kind, order, 1, nil
		}
	case 'i', 'u':
		if size == 1 || size == 2 || size == 4 || size == 8 {
			return kind, order, size, nil
		}
	case 'f':
		if size == 4 || size == 8 {
			return kind, order, size, nil
		}
		if size == 2 {
			return 0, nil, 0, fmt.Errorf("dtype float16: convert to float32 before dumping (dump_batch does)")
		}
	case 'S':
		if size <= MaxStringItemBytes {
			return kind, order, size, nil
		}
	case 'U':
		if size*4 <= MaxStringItemBytes {
			return kind, order, size * 4, nil
		}
	case 'O':
		return 0, nil, 0, fmt.Errorf("dtype object (pickled Python objects) is refused: save ids as strings (np.array(ids, dtype=str)) or integers")
	}
	return 0, nil, 0, fmt.Errorf("dtype %q is not one trueset reads (bool, integers, float32/64, strings)", t)
}

func decodeNumbers(b []byte, kind byte, o binary.ByteOrder, item, n int) []float32 {
	out := make([]float32, n)
	switch {
	case kind == 'u' && item == 1, kind == 'b':
		for i, v := range b[:n] {
			out[i] = float32(v)
		}
	case kind == 'i' && item == 1:
		for i, v := range b[:n] {
			out[i] = float32(int8(v))
		}
	case kind == 'u' && item == 2:
		for i := range out {
			out[i] = float32(o.Uint16(b[2*i:]))
		}
	case kind == 'i' && item == 2:
		for i := range out {
			out[i] = float32(int16(o.Uint16(b[2*i:])))
		}
	case kind == 'u' && item == 4:
		for i := range out {
			out[i] = float32(o.Uint32(b[4*i:]))
		}
	case kind == 'i' && item == 4:
		for i := range out {
			out[i] = float32(int32(o.Uint32(b[4*i:])))
		}
	case kind == 'u' && item == 8:
		for i := range out {
			out[i] = float32(o.Uint64(b[8*i:]))
		}
	case kind == 'i' && item == 8:
		for i := range out {
			out[i] = float32(int64(o.Uint64(b[8*i:])))
		}
	case kind == 'f' && item == 4:
		for i := range out {
			out[i] = math.Float32frombits(o.Uint32(b[4*i:]))
		}
	case kind == 'f' && item == 8:
		for i := range out {
			out[i] = float32(math.Float64frombits(o.Uint64(b[8*i:])))
		}
	}
	return out
}

func decodeStrings(b []byte, kind byte, o binary.ByteOrder, item, n int) []string {
	out := make([]string, n)
	for i := range out {
		raw := b[i*item : (i+1)*item]
		if kind == 'S' {
			out[i] = strings.TrimRight(string(raw), "\x00")
			continue
		}
		var sb strings.Builder
		for j := 0; j+4 <= len(raw); j += 4 {
			r := rune(o.Uint32(raw[j:]))
			if r == 0 {
				break
			}
			sb.WriteRune(r)
		}
		out[i] = sb.String()
	}
	return out
}

// toC reorders Fortran-order (column-major) data to C order.
func (a *Array) toC() {
	shape := a.Shape
	nd := len(shape)
	n := len(a.Num) + len(a.Str)
	// Fortran data of shape s is C data of shape reversed(s); transposing
	// it back: element at C index (i0..ik) is at F offset Σ i_j·Π_{m<j} s_m.
	fstride := make([]int, nd)
	acc := 1
	for j := 0; j < nd; j++ {
		fstride[j] = acc
		acc *= shape[j]
	}
	idx := make([]int, nd)
	src := func(k int) int {
		off := 0
		for j := 0; j < nd; j++ {
			off += idx[j] * fstride[j]
		}
		return off
	}
	numOut := make([]float32, len(a.Num))
	strOut := make([]string, len(a.Str))
	for k := 0; k < n; k++ {
		s := src(k)
		if a.Num != nil {
			numOut[k] = a.Num[s]
		} else {
			strOut[k] = a.Str[s]
		}
		for j := nd - 1; j >= 0; j-- {
			idx[j]++
			if idx[j] < shape[j] {
				break
			}
			idx[j] = 0
		}
	}
	if a.Num != nil {
		a.Num = numOut
	} else {
		a.Str = strOut
	}
}

package manifest

import (
	"bufio"
	"fmt"
	"image"
	"io"
	"strings"
	"sync"

	"github.com/trueset/trueset/internal/safefile"
)

// Every reader of a dataset's sample files (verify, stats, preview, report,
// augment, merge, readback, export, convert) opens them here, by the
// record's relative path, whatever the layout: in the folder layout the file
// DIR/rel; in the packed layout the member rel of a pack, found through
// packs/index.jsonl (pack.go).

// SampleFile is one of a record's PNG files, opened for reading through
// safefile (a regular file inside the dataset folder, or a member of a pack
// that is one; at most MaxSampleFileBytes). Its header is checked before
// anything is decoded.
type SampleFile struct {
	Rel    string
	ra     io.ReaderAt
	off    int64
	size   int64
	closer io.Closer
	cfg    image.Config
	br     *bufio.Reader // from readerPool, reused for every pass over the file
}

// readerPool holds the buffered readers sample files borrow, so that
// reading a file three times (hash, header, pixels) across a million
// records does not allocate a buffer each time.
var readerPool = sync.Pool{New: func() any { return bufio.NewReaderSize(nil, 32<<10) }}

// SampleError is a sample file that cannot be used, with the kind of check
// it fails (KindPath, KindMissing, KindFormat or KindSize).
type SampleError struct {
	Rel   string
	Check string
	Msg   string
}

func (e *SampleError) Error() string {
	if strings.HasPrefix(e.Msg, "is ") || strings.HasPrefix(e.Msg, "decodes ") {
		return e.Rel + " " + e.Msg // "images/a.png is 9x9, the record says 8x8"
	}
	return e.Rel + ": " + e.Msg
}

// OpenSample opens the record file rel of the dataset in dir for reading.
// In the folder layout rel must stay inside dir (no symbolic link out of
// it) and name a regular file (never a pipe or a device, which could hang
// or never end); in the packed layout it must be a member the index lists,
// in a pack that is a regular file. Either way at most MaxSampleFileBytes.
func OpenSample(dir, rel string) (*SampleFile, error) {
	px, err := packIndexFor(dir)
	if err != nil {
		return nil, &SampleError{Rel: rel, Check: KindMissing, Msg: err.Error()}
	}
	if px != nil {
		return px.open(rel)
	}
	p, err := ResolveInside(dir, rel)
	if err != nil {
		return nil, &SampleError{Rel: rel, Check: KindPath, Msg: err.Error()}
	}
	f, err := safefile.Open(p)
	if err != nil {
		return nil, &SampleError{Rel: rel, Check: KindMissing, Msg: safefile.Msg(err)}
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, &SampleError{Rel: rel, Check: KindMissing, Msg: err.Error()}
	}
	if st.Size() > MaxSampleFileBytes {
		f.Close()
		return nil, &SampleError{Rel: rel, Check: KindSize, Msg: fmt.Sprintf("%d bytes; a sample file may take at most %d", st.Size(), MaxSampleFileBytes)}
	}
	return &SampleFile{Rel: rel, ra: f, size: st.Size(), closer: f}, nil
}

// ReadSample returns the bytes of the record file rel (OpenSample's
// checks), e.g. to copy it byte for byte.
func ReadSample(dir, rel string) ([]byte, error) {
	s, err := OpenSample(dir, rel)
	if err != nil {
		return nil, err
	}
	defer s.Close()
	b := make([]byte, s.size)
	if _, err := s.ra.ReadAt(b, s.off); err != nil && !(err == io.EOF && s.size == 0) {
		return nil, &SampleError{Rel: rel, Check: KindMissing, Msg: err.Error()}
	}
	return b, nil
}

// Size is the file's length in bytes.
func (s *SampleFile) Size() int64 { return s.size }

// Close releases the file.
func (s *SampleFile) Close() {
	if s.closer != nil {
		s.closer.Close()
	}
	if s.br != nil {
		s.br.Reset(nil)
		readerPool.Put(s.br)
		s.br = nil
	}
}

func (s *SampleFile) reader() (*bufio.Reader, error) {
	if s.br == nil {
		s.br = readerPool.Get().(*bufio.Reader)
	}
	// Never more than the size seen at open: a file that grows is not read on.
	s.br.Reset(io.NewSectionReader(s.ra, s.off, s.size))
	return s.br, nil
}

package manifest

import "io"

// Section reads the file's bytes from its first, never past the size seen
// at open (a file that grows is not read on), e.g. for a caller that checks
// a header of its own or hashes the file.
func (s *SampleFile) Section() *io.SectionReader {
	return io.NewSectionReader(s.ra, s.off, s.size)
}

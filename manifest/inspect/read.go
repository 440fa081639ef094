package inspect

import (
	"fmt"
	"image"
	"image/color"
	"sync"

	"github.com/trueset/trueset/manifest"
)

// RunBudgetBytes bounds the decoded pixels alive at once in one Compute or
// Preview run, whatever the number of workers: a worker reserves what a
// sample will take decoded (from the PNG headers, before decoding) and
// waits while the others hold the rest. One image may be at most
// MaxPixels; the largest sample (a 16-bit RGB image of MaxPixels, its gray
// copy and its mask) fits the budget, so nothing that passes the header
// check is refused for the budget alone.
const RunBudgetBytes = 768 << 20

// budget is a counting semaphore over bytes of decoded pixels.
type budget struct {
	mu    sync.Mutex
	cond  *sync.Cond
	free  int64
	total int64
}

func newBudget(total int64) *budget {
	b := &budget{free: total, total: total}
	b.cond = sync.NewCond(&b.mu)
	return b
}

// acquire reserves n bytes, waiting for others to release them; more than
// the whole budget is refused at once.
func (b *budget) acquire(n int64) error {
	if n > b.total {
		return fmt.Errorf("needs %d bytes decoded; the budget of a run is %d", n, b.total)
	}
	b.mu.Lock()
	for b.free < n {
		b.cond.Wait()
	}
	b.free -= n
	b.mu.Unlock()
	return nil
}

func (b *budget) release(n int64) {
	b.mu.Lock()
	b.free += n
	b.mu.Unlock()
	b.cond.Broadcast()
}

// grayCopyBytes is what toGray allocates for an image with this header:
// nothing for a gray one, a byte per pixel otherwise.
func grayCopyBytes(cfg image.Config) int64 {
	switch cfg.ColorModel {
	case color.GrayModel, color.Gray16Model:
		return 0
	}
	return int64(cfg.Width) * int64(cfg.Height)
}

// openImage opens one of a record's PNGs through manifest.OpenSample
// (regular files inside the dataset folder, bounded in bytes) and checks its
// header against the record's width and height and MaxPixels; nothing is
// decoded yet.
func openImage(dir, rel string, w, h int) (*manifest.SampleFile, image.Config, error) {
	f, err := manifest.OpenSample(dir, rel)
	if err != nil {
		return nil, image.Config{}, err
	}
	cfg, err := f.Header(w, h)
	if err != nil {
		f.Close()
		return nil, cfg, err
	}
	return f, cfg, nil
}

// openMask is openImage for a semantic mask, which must be 8-bit indexed
// or gray (refused from the header, before decoding).
func openMask(dir, rel string, w, h int) (*manifest.SampleFile, image.Config, error) {
	f, cfg, err := openImage(dir, rel, w, h)
	if err != nil {
		return nil, cfg, err
	}
	if _, ok := cfg.ColorModel.(color.Palette); !ok && cfg.ColorModel != color.GrayModel {
		f.Close()
		return nil, cfg, fmt.Errorf("%s: semantic mask is not an 8-bit indexed or gray PNG", rel)
	}
	return f, cfg, nil
}

// decodeClose decodes a header-checked file and closes it.
func decodeClose(f *manifest.SampleFile) (image.Image, error) {
	defer f.Close()
	return f.Decode()
}

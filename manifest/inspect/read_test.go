package inspect

import (
	"bytes"
	"image"
	"image/color"
	"image/png"
	"reflect"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/trueset/trueset/manifest"
)

// The budget is a counting semaphore: however many workers ask at once,
// what they hold together never exceeds the total, and a request above the
// total is refused rather than waited for forever.
func TestBudgetBoundsWhatIsHeld(t *testing.T) {
	const total = 1000
	b := newBudget(total)
	var held, peak atomic.Int64
	var wg sync.WaitGroup
	for w := 0; w < 32; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			for i := 0; i < 200; i++ {
				n := int64(100 + (w*37+i*11)%400)
				if err := b.acquire(n); err != nil {
					t.Error(err)
					return
				}
				h := held.Add(n)
				for {
					p := peak.Load()
					if h <= p || peak.CompareAndSwap(p, h) {
						break
					}
				}
				held.Add(-n)
				b.release(n)
			}
		}(w)
	}
	done := make(chan struct{})
	go func() { wg.Wait(); close(done) }()
	select {
	case <-done:
	case <-time.After(60 * time.Second): // detects a deadlock, not a speed check
		t.Fatal("workers did not finish: the budget deadlocked")
	}
	if p := peak.Load(); p > total || p < 100 {
		t.Errorf("peak held %d, want 100..%d", p, total)
	}
	if err := b.acquire(total + 1); err == nil {
		t.Error("a request over the whole budget was accepted")
	}
}

// DecodedBytes, computed from the header alone, equals the pixel memory of
// what the standard library's PNG decoder returns for each kind trueset
// meets (image/png: gray, 16-bit gray, paletted, RGBA, 16-bit RGBA).
func TestDecodedBytesMatchesDecoder(t *testing.T) {
	r := image.Rect(0, 0, 7, 3)
	for _, m := range []image.Image{
		image.NewGray(r), image.NewGray16(r), image.NewPaletted(r, color.Palette{color.Black, color.White}),
		image.NewRGBA(r), image.NewNRGBA(r), image.NewRGBA64(r),
	} {
		var buf bytes.Buffer
		if err := png.Encode(&buf, m); err != nil {
			t.Fatal(err)
		}
		cfg, err := png.DecodeConfig(bytes.NewReader(buf.Bytes()))
		if err != nil {
			t.Fatal(err)
		}
		d, err := png.Decode(bytes.NewReader(buf.Bytes()))
		if err != nil {
			t.Fatal(err)
		}
		pix := int64(len(reflect.ValueOf(d).Elem().FieldByName("Pix").Bytes()))
		if got := manifest.DecodedBytes(cfg); got != pix {
			t.Errorf("%T encoded, %T decoded: DecodedBytes %d, decoder holds %d", m, d, got, pix)
		}
	}
}

package manifest

import (
	"context"
	"sync"
)

// Produce makes job i: it writes the job's files and returns its records
// (in the order they enter the manifest) and the bytes written.
type Produce func(i int) ([]*Record, int64, error)

type jobResult struct {
	i     int
	recs  []*Record
	bytes int64
	err   error
}

// RunOrdered runs jobs lo..hi-1 on workers goroutines, each with its own
// Produce from newProduce (so per-worker buffers are never shared), and
// appends every job's records to w strictly in job order through a reorder
// window of 4×workers jobs, so memory does not grow with the job count. The
// first error cancels the rest. progress, if set, is called in order from
// one goroutine. It returns the number of jobs appended and the bytes their
// files took.
func RunOrdered(ctx context.Context, lo, hi, workers int, newProduce func() Produce, w *Writer, progress func(done, total int)) (int, int64, error) {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	window := 4 * workers
	slots := make(chan struct{}, window)
	jobs := make(chan int)
	results := make(chan jobResult, window)
	var wg sync.WaitGroup
	go func() {
		defer close(jobs)
		for i := lo; i < hi; i++ {
			select {
			case slots <- struct{}{}:
			case <-ctx.Done():
				return
			}
			select {
			case jobs <- i:
			case <-ctx.Done():
				return
			}
		}
	}()
	for k := 0; k < workers; k++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			produce := newProduce()
			for i := range jobs {
				recs, n, err := produce(i)
				// Each record's line is marshaled here, in parallel, so
				// the one goroutine that appends in order only copies it.
				for _, rec := range recs {
					if err != nil {
						break
					}
					rec.line, err = MarshalRecord(rec)
				}
				select {
				case results <- jobResult{i, recs, n, err}:
				case <-ctx.Done():
					return
				}
			}
		}()
	}
	go func() { wg.Wait(); close(results) }()

	pending := map[int]jobResult{}
	next := lo
	var total int64
	var firstErr error
	for res := range results {
		if firstErr != nil {
			continue
		}
		if res.err != nil {
			firstErr = res.err
			cancel()
			continue
		}
		total += res.bytes
		pending[res.i] = res
		for {
			r, ok := pending[next]
			if !ok {
				break
			}
			delete(pending, next)
			for _, rec := range r.recs {
				if err := w.Append(rec); err != nil {
					firstErr = err
					cancel()
					break
				}
			}
			if firstErr != nil {
				break
			}
			next++
			<-slots
			if progress != nil {
				progress(next-lo, hi-lo)
			}
		}
	}
	if firstErr == nil && ctx.Err() != nil {
		firstErr = ctx.Err()
	}
	return next - lo, total, firstErr
}

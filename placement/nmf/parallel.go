package nmf

import (
	"sync"
	"sync/atomic"
)

// parallelFor calls body(worker, i) for i = 0..n-1 on up to workers goroutines, handing out
// chunks of consecutive indexes on demand. Each index is processed exactly once and by one call,
// so results that depend only on i (as every use here does) do not depend on the number of
// workers or on scheduling. It returns the error of the lowest index that failed, so that the
// error reported does not depend on scheduling either.
func parallelFor(n, workers int, body func(worker, i int) error) error {
	if n <= 0 {
		return nil
	}
	if workers > n {
		workers = n
	}
	if workers <= 1 {
		for i := 0; i < n; i++ {
			if err := body(0, i); err != nil {
				return err
			}
		}
		return nil
	}
	chunk := n / (workers * 8)
	if chunk < 1 {
		chunk = 1
	}
	var next atomic.Int64
	var mu sync.Mutex
	firstBad, firstErr := n, error(nil)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			for {
				lo := int(next.Add(int64(chunk))) - chunk
				if lo >= n {
					return
				}
				hi := min(lo+chunk, n)
				for i := lo; i < hi; i++ {
					if err := body(w, i); err != nil {
						mu.Lock()
						if i < firstBad {
							firstBad, firstErr = i, err
						}
						mu.Unlock()
						break
					}
				}
			}
		}(w)
	}
	wg.Wait()
	return firstErr
}

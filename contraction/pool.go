package contraction

import (
	"runtime"
	"sync"
	"sync/atomic"
)

// Workers returns the size of the worker pool: GOMAXPROCS.
func Workers() int { return runtime.GOMAXPROCS(0) }

// ForEach calls fn(worker, item) for item = 0..n-1 on min(Workers(), n)
// goroutines; worker is in [0, Workers()) and identifies the goroutine, so fn
// can use per-worker buffers. Items are handed out in order from a shared
// counter. ForEach returns when all items are done. It is the one place where
// rcdemand's market-level parallelism happens.
func ForEach(n int, fn func(worker, item int)) {
	workers := min(Workers(), n)
	if workers <= 1 {
		for i := 0; i < n; i++ {
			fn(0, i)
		}
		return
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	wg.Add(workers)
	for w := 0; w < workers; w++ {
		go func(w int) {
			defer wg.Done()
			for {
				i := int(next.Add(1) - 1)
				if i >= n {
					return
				}
				fn(w, i)
			}
		}(w)
	}
	wg.Wait()
}

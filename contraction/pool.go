package contraction

import (
	"runtime"
	"sync"
	"sync/atomic"
)

// Workers returns the number of goroutines a pool dispatch may use:
// GOMAXPROCS at the moment of the call.
func Workers() int { return runtime.GOMAXPROCS(0) }

// Pool is rcdemand's one worker pool. Run hands items 0..n−1 (markets,
// parameter draws, replications) to min(GOMAXPROCS, n) goroutines; each
// goroutine owns one worker value W with its buffers. Workers are created by
// the pool's constructor when a dispatch needs more of them than exist, so a
// pool made under GOMAXPROCS = 1 serves a later dispatch under 2 without
// sharing buffers. A worker's buffers grow to the largest item it has seen
// and are reused after that (see Market.Set).
//
// Items are handed out in order from a shared counter. Each item must write
// only its own outputs; callers reduce those outputs in item order after Run
// returns, so results never depend on scheduling. Run calls on one pool are
// serialised; a pool is not for nested use (fn must not call Run on the same
// pool).
type Pool[W any] struct {
	mu      sync.Mutex
	create  func() W
	workers []W
}

// NewPool returns a pool whose workers are made by create.
func NewPool[W any](create func() W) *Pool[W] {
	return &Pool[W]{create: create}
}

// Run calls fn(worker, item) for item = 0..n−1 and returns when all are done.
func (p *Pool[W]) Run(n int, fn func(w W, item int)) {
	p.mu.Lock()
	defer p.mu.Unlock()
	k := min(Workers(), n)
	for len(p.workers) < max(k, 1) {
		p.workers = append(p.workers, p.create())
	}
	dispatch(n, k, func(g, item int) { fn(p.workers[g], item) })
}

// ForEach calls fn(item) for item = 0..n−1 on min(GOMAXPROCS, n)
// goroutines, for work that needs no per-worker buffers. It is the same
// dispatch as Pool.Run.
func ForEach(n int, fn func(item int)) {
	dispatch(n, min(Workers(), n), func(_, item int) { fn(item) })
}

// dispatch runs fn(goroutine, item) over n items on k goroutines (inline
// when k ≤ 1). It is the only place in rcdemand that starts goroutines over
// markets, draws or replications.
func dispatch(n, k int, fn func(g, item int)) {
	if k <= 1 {
		for i := 0; i < n; i++ {
			fn(0, i)
		}
		return
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	wg.Add(k)
	for g := 0; g < k; g++ {
		go func(g int) {
			defer wg.Done()
			for {
				i := int(next.Add(1) - 1)
				if i >= n {
					return
				}
				fn(g, i)
			}
		}(g)
	}
	wg.Wait()
}

package nn

import (
	"runtime"
	"sync"
)

// maxShards is the fixed number of pieces a batch is split into for
// parallel work. It does not depend on GOMAXPROCS: each shard accumulates
// its own partial gradients and the shards are reduced in index order, so
// the result is bit-identical whatever the number of workers.
const maxShards = 8

// shardCount returns the shards used for a batch of n samples.
func shardCount(n int) int { return min(n, maxShards) }

// shardBounds returns the samples [lo, hi) of shard s of a batch of n.
func shardBounds(n, s int) (lo, hi int) {
	k := shardCount(n)
	return s * n / k, (s + 1) * n / k
}

// shardTask is implemented by layers with parallel work; phase tells the
// layer which of its passes to run.
type shardTask interface {
	runShard(phase, shard, lo, hi int)
}

type job struct {
	t                    shardTask
	phase, shard, lo, hi int
	wg                   *sync.WaitGroup
}

// executor runs shards on a fixed set of worker goroutines. Submitting
// work allocates nothing.
type executor struct {
	workers int
	jobs    chan job
	wg      sync.WaitGroup
	once    sync.Once
}

func newExecutor() *executor {
	return &executor{workers: runtime.GOMAXPROCS(0)}
}

func (e *executor) start() {
	e.jobs = make(chan job, maxShards)
	for i := 0; i < e.workers; i++ {
		go func(jobs <-chan job) { // the channel is passed in: close() resets the field
			for j := range jobs {
				j.t.runShard(j.phase, j.shard, j.lo, j.hi)
				j.wg.Done()
			}
		}(e.jobs)
	}
}

// run executes phase of t on every shard of a batch of n and waits.
func (e *executor) run(t shardTask, phase, n int) {
	k := shardCount(n)
	if e.workers <= 1 || k == 1 {
		for s := 0; s < k; s++ {
			lo, hi := shardBounds(n, s)
			t.runShard(phase, s, lo, hi)
		}
		return
	}
	e.once.Do(e.start)
	e.wg.Add(k)
	for s := 0; s < k; s++ {
		lo, hi := shardBounds(n, s)
		e.jobs <- job{t: t, phase: phase, shard: s, lo: lo, hi: hi, wg: &e.wg}
	}
	e.wg.Wait()
}

// close stops the workers.
func (e *executor) close() {
	if e.jobs != nil {
		close(e.jobs)
		e.jobs = nil
	}
}

package modelstore

import (
	"sync"
	"sync/atomic"

	"strayleaf/placement/model"
)

// maxCachedRefs bounds the reference cache; past it the whole map is dropped and refilled.
const maxCachedRefs = 4096

// modelCache holds decoded models by version, bounded by the sum of their SizeBytes and evicting
// the least recently used, and the resolution of reference strings to versions.
//
// Versions never change, so a cached model never goes stale; it leaves the cache only by
// eviction or when its version is deleted. Reference resolutions ("name@current" -> name@4) do
// change: every committed write calls invalidateRefs, and a resolution made in a transaction
// that began before a write is not remembered (the generation check in rememberRef).
type modelCache struct {
	limit int64 // <= 0: keep no models

	mu       sync.RWMutex
	gen      uint64
	refs     map[string]Ref
	models   map[Ref]*cacheEntry
	bytes    int64
	inflight map[Ref]*flight

	clock atomic.Uint64 // use stamps for LRU order
}

type cacheEntry struct {
	m    *model.Model
	size int64
	used atomic.Uint64
}

type flight struct {
	done chan struct{}
	m    *model.Model
	err  error
}

func newModelCache(limit int64) *modelCache {
	return &modelCache{limit: limit, refs: map[string]Ref{}, models: map[Ref]*cacheEntry{}, inflight: map[Ref]*flight{}}
}

// lookup returns the cached model a reference string was last resolved to, if both are cached.
func (c *modelCache) lookup(ref string) (*model.Model, Ref, bool) {
	c.mu.RLock()
	r, ok := c.refs[ref]
	var e *cacheEntry
	if ok {
		e = c.models[r]
	}
	c.mu.RUnlock()
	if e == nil {
		return nil, Ref{}, false
	}
	e.used.Store(c.clock.Add(1))
	return e.m, r, true
}

// generation returns the write generation; take it before the transaction that resolves a
// reference and hand it to rememberRef.
func (c *modelCache) generation() uint64 {
	c.mu.RLock()
	defer c.mu.RUnlock()
	return c.gen
}

// rememberRef records that ref resolved to r in a transaction begun at generation gen.
func (c *modelCache) rememberRef(ref string, r Ref, gen uint64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.gen != gen {
		return
	}
	if len(c.refs) >= maxCachedRefs {
		c.refs = map[string]Ref{}
	}
	c.refs[ref] = r
}

// invalidateRefs forgets every reference resolution; call after each committed write.
func (c *modelCache) invalidateRefs() {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.gen++
	clear(c.refs)
}

// get returns the cached model of version r.
func (c *modelCache) get(r Ref) (*model.Model, bool) {
	c.mu.RLock()
	e := c.models[r]
	c.mu.RUnlock()
	if e == nil {
		return nil, false
	}
	e.used.Store(c.clock.Add(1))
	return e.m, true
}

// put caches m as version r, evicting least recently used models to stay within the bound. A
// model larger than the whole bound is not kept.
func (c *modelCache) put(r Ref, m *model.Model) {
	size := m.SizeBytes()
	if size < 1 {
		size = 1
	}
	if c.limit <= 0 || size > c.limit {
		return
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	if _, ok := c.models[r]; ok {
		return
	}
	for c.bytes+size > c.limit {
		c.evictOldestLocked()
	}
	e := &cacheEntry{m: m, size: size}
	e.used.Store(c.clock.Add(1))
	c.models[r] = e
	c.bytes += size
}

func (c *modelCache) evictOldestLocked() {
	var oldest Ref
	var best *cacheEntry
	for r, e := range c.models {
		if best == nil || e.used.Load() < best.used.Load() {
			oldest, best = r, e
		}
	}
	if best == nil {
		return
	}
	delete(c.models, oldest)
	c.bytes -= best.size
}

// drop removes version r (it was deleted).
func (c *modelCache) drop(r Ref) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if e, ok := c.models[r]; ok {
		delete(c.models, r)
		c.bytes -= e.size
	}
}

// load returns version r from the cache or, once for all concurrent callers, from fetch.
func (c *modelCache) load(r Ref, fetch func() (*model.Model, error)) (*model.Model, error) {
	if m, ok := c.get(r); ok {
		return m, nil
	}
	c.mu.Lock()
	if e := c.models[r]; e != nil {
		c.mu.Unlock()
		return e.m, nil
	}
	if f := c.inflight[r]; f != nil {
		c.mu.Unlock()
		<-f.done
		return f.m, f.err
	}
	f := &flight{done: make(chan struct{})}
	c.inflight[r] = f
	c.mu.Unlock()

	f.m, f.err = fetch()
	if f.err == nil {
		c.put(r, f.m)
	}
	c.mu.Lock()
	delete(c.inflight, r)
	c.mu.Unlock()
	close(f.done)
	return f.m, f.err
}

// stats reports the number of cached models and their accounted bytes.
func (c *modelCache) stats() (n int, bytes int64) {
	c.mu.RLock()
	defer c.mu.RUnlock()
	return len(c.models), c.bytes
}

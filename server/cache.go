package server

import "sync"

// lru is a bounded least-recently-used map, limited by entry count and by an
// approximate byte size. Safe for concurrent use. The recency list is
// intrusive (one allocation per entry).
type lru[V any] struct {
	mu       sync.Mutex
	maxN     int
	maxBytes int64
	bytes    int64
	m        map[string]*lruEntry[V]
	head     lruEntry[V] // sentinel: head.next is the most recent
}

type lruEntry[V any] struct {
	key        string
	val        V
	size       int64
	prev, next *lruEntry[V]
}

func newLRU[V any](maxN int, maxBytes int64) *lru[V] {
	c := &lru[V]{maxN: maxN, maxBytes: maxBytes, m: map[string]*lruEntry[V]{}}
	c.head.next, c.head.prev = &c.head, &c.head
	return c
}

func (c *lru[V]) unlink(e *lruEntry[V]) {
	e.prev.next, e.next.prev = e.next, e.prev
}

func (c *lru[V]) pushFront(e *lruEntry[V]) {
	e.prev, e.next = &c.head, c.head.next
	c.head.next.prev = e
	c.head.next = e
}

func (c *lru[V]) get(key string) (V, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if e, ok := c.m[key]; ok {
		c.unlink(e)
		c.pushFront(e)
		return e.val, true
	}
	var zero V
	return zero, false
}

// put stores val with an approximate size in bytes; entries larger than the
// whole budget are not kept.
func (c *lru[V]) put(key string, val V, size int64) {
	if c.maxN <= 0 || size > c.maxBytes {
		return
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	if e, ok := c.m[key]; ok {
		c.bytes += size - e.size
		e.val, e.size = val, size
		c.unlink(e)
		c.pushFront(e)
	} else {
		e := &lruEntry[V]{key: key, val: val, size: size}
		c.m[key] = e
		c.pushFront(e)
		c.bytes += size
	}
	for len(c.m) > c.maxN || c.bytes > c.maxBytes {
		e := c.head.prev
		c.unlink(e)
		delete(c.m, e.key)
		c.bytes -= e.size
	}
}

func (c *lru[V]) remove(key string) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if e, ok := c.m[key]; ok {
		c.unlink(e)
		delete(c.m, key)
		c.bytes -= e.size
	}
}

func (c *lru[V]) len() int {
	c.mu.Lock()
	defer c.mu.Unlock()
	return len(c.m)
}

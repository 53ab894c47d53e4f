package server

import (
	"container/list"
	"sync"
)

// lru is a bounded least-recently-used map, limited by entry count and by an
// approximate byte size. Safe for concurrent use.
type lru[V any] struct {
	mu       sync.Mutex
	maxN     int
	maxBytes int64
	bytes    int64
	ll       list.List
	m        map[string]*list.Element
}

type lruEntry[V any] struct {
	key  string
	val  V
	size int64
}

func newLRU[V any](maxN int, maxBytes int64) *lru[V] {
	return &lru[V]{maxN: maxN, maxBytes: maxBytes, m: map[string]*list.Element{}}
}

func (c *lru[V]) get(key string) (V, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if e, ok := c.m[key]; ok {
		c.ll.MoveToFront(e)
		return e.Value.(*lruEntry[V]).val, true
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
		old := e.Value.(*lruEntry[V])
		c.bytes += size - old.size
		old.val, old.size = val, size
		c.ll.MoveToFront(e)
	} else {
		c.m[key] = c.ll.PushFront(&lruEntry[V]{key: key, val: val, size: size})
		c.bytes += size
	}
	for c.ll.Len() > c.maxN || c.bytes > c.maxBytes {
		e := c.ll.Back()
		ent := e.Value.(*lruEntry[V])
		c.ll.Remove(e)
		delete(c.m, ent.key)
		c.bytes -= ent.size
	}
}

func (c *lru[V]) remove(key string) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if e, ok := c.m[key]; ok {
		ent := e.Value.(*lruEntry[V])
		c.ll.Remove(e)
		delete(c.m, key)
		c.bytes -= ent.size
	}
}

func (c *lru[V]) len() int {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.ll.Len()
}

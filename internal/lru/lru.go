// Package lru is a bounded map that forgets its least recently used
// entries: the cache of results and of decoded models in the server, and
// the compile cache of alert rules.
package lru

import "sync"

// Cache is a least-recently-used map limited by its number of entries and
// by the total of the sizes given to Put (an approximate count of bytes).
// It is safe for concurrent use. The recency list is intrusive: one
// allocation per new entry.
type Cache[K comparable, V any] struct {
	mu         sync.Mutex
	maxEntries int
	maxBytes   int64
	bytes      int64
	m          map[K]*entry[K, V]
	head       entry[K, V] // sentinel: head.next is the most recent
}

type entry[K comparable, V any] struct {
	key        K
	val        V
	size       int64
	prev, next *entry[K, V]
}

// New returns an empty cache holding at most maxEntries entries whose
// sizes add up to at most maxBytes. With maxEntries <= 0 it keeps nothing.
func New[K comparable, V any](maxEntries int, maxBytes int64) *Cache[K, V] {
	c := &Cache[K, V]{maxEntries: maxEntries, maxBytes: maxBytes, m: map[K]*entry[K, V]{}}
	c.head.next, c.head.prev = &c.head, &c.head
	return c
}

func (c *Cache[K, V]) unlink(e *entry[K, V]) {
	e.prev.next, e.next.prev = e.next, e.prev
}

func (c *Cache[K, V]) pushFront(e *entry[K, V]) {
	e.prev, e.next = &c.head, c.head.next
	c.head.next.prev = e
	c.head.next = e
}

// Get returns the value kept for key and makes it the most recently used.
func (c *Cache[K, V]) Get(key K) (V, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if e, ok := c.touch(key); ok {
		return e.val, true
	}
	var zero V
	return zero, false
}

// touch returns the entry for key made the most recent; c.mu is held.
func (c *Cache[K, V]) touch(key K) (*entry[K, V], bool) {
	e, ok := c.m[key]
	if ok {
		c.unlink(e)
		c.pushFront(e)
	}
	return e, ok
}

// GetOrAdd returns the value kept for key and true; or, when there is
// none, the value made by add, kept with the size add gives, and false. The
// look-up and the insertion are one step: of several callers asking for the
// same new key at once, one runs add and the others get its value. add
// runs with the cache locked, so it must be quick (make a placeholder that
// is filled in later, not the value itself).
func (c *Cache[K, V]) GetOrAdd(key K, add func() (V, int64)) (V, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if e, ok := c.touch(key); ok {
		return e.val, true
	}
	val, size := add()
	c.put(key, val, size)
	return val, false
}

// Put keeps val for key with the given size, as the most recently used
// entry, and drops the least recently used entries beyond the limits. An
// entry larger than the whole byte budget is not kept.
func (c *Cache[K, V]) Put(key K, val V, size int64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.put(key, val, size)
}

func (c *Cache[K, V]) put(key K, val V, size int64) {
	if c.maxEntries <= 0 || size > c.maxBytes {
		return
	}
	if e, ok := c.m[key]; ok {
		c.bytes += size - e.size
		e.val, e.size = val, size
		c.unlink(e)
		c.pushFront(e)
	} else {
		e := &entry[K, V]{key: key, val: val, size: size}
		c.m[key] = e
		c.pushFront(e)
		c.bytes += size
	}
	for len(c.m) > c.maxEntries || c.bytes > c.maxBytes {
		e := c.head.prev
		c.unlink(e)
		delete(c.m, e.key)
		c.bytes -= e.size
	}
}

// Remove drops the entry for key, if any.
func (c *Cache[K, V]) Remove(key K) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if e, ok := c.m[key]; ok {
		c.unlink(e)
		delete(c.m, key)
		c.bytes -= e.size
	}
}

// Len returns the number of entries kept.
func (c *Cache[K, V]) Len() int {
	c.mu.Lock()
	defer c.mu.Unlock()
	return len(c.m)
}

// Bytes returns the total size of the entries kept.
func (c *Cache[K, V]) Bytes() int64 {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.bytes
}

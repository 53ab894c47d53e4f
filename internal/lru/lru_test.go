package lru

import (
	"fmt"
	"math"
	"sync"
	"testing"
)

func TestCache(t *testing.T) {
	c := New[string, int](3, 100)
	for i := range 3 {
		c.Put(fmt.Sprint(i), i, 10)
	}
	c.Get("0") // 0 is now the most recent; 1 the least
	c.Put("3", 3, 10)
	if _, ok := c.Get("1"); ok {
		t.Error("least recently used entry kept past the count limit")
	}
	for _, k := range []string{"0", "2", "3"} {
		if v, ok := c.Get(k); !ok || fmt.Sprint(v) != k {
			t.Errorf("Get(%s) = %v, %v", k, v, ok)
		}
	}
	c.Put("big", 9, 75) // 30 + 75 > 100: evicts until it fits
	if c.Len() != 3 || c.Bytes() > 100 {
		t.Errorf("after a big entry: %d entries, %d bytes", c.Len(), c.Bytes())
	}
	if _, ok := c.Get("0"); ok {
		t.Error("byte limit not enforced (oldest entry kept)")
	}
	c.Put("huge", 1, 101)
	if _, ok := c.Get("huge"); ok {
		t.Error("entry larger than the budget kept")
	}
	c.Put("3", 33, 5) // update in place
	if v, _ := c.Get("3"); v != 33 {
		t.Errorf("update: %d", v)
	}
	if c.Bytes() != 90 { // 10 + 75 + 5
		t.Errorf("bytes after an update: %d; want 90", c.Bytes())
	}
	c.Remove("3")
	c.Remove("never there")
	if _, ok := c.Get("3"); ok || c.Len() != 2 || c.Bytes() != 85 {
		t.Errorf("remove: len %d, bytes %d", c.Len(), c.Bytes())
	}
}

func TestCacheLimits(t *testing.T) {
	for _, c := range []struct {
		name       string
		maxEntries int
		maxBytes   int64
		puts       int
		wantLen    int
	}{
		{"disabled", 0, 100, 5, 0},
		{"negative", -1, 100, 5, 0},
		{"count only", 4, math.MaxInt64, 10, 4},
		{"bytes only", 1000, 25, 10, 2}, // sizes 10: two fit in 25
		{"one", 1, 100, 3, 1},
	} {
		t.Run(c.name, func(t *testing.T) {
			cache := New[int, string](c.maxEntries, c.maxBytes)
			for i := range c.puts {
				cache.Put(i, fmt.Sprint(i), 10)
			}
			if cache.Len() != c.wantLen {
				t.Errorf("Len = %d; want %d", cache.Len(), c.wantLen)
			}
			// The most recent entries are the ones kept.
			for i := c.puts - c.wantLen; i < c.puts; i++ {
				if _, ok := cache.Get(i); !ok {
					t.Errorf("recent entry %d dropped", i)
				}
			}
		})
	}
}

// TestCacheStructKeys: any comparable key, here a struct like the rules'
// compile cache uses.
func TestCacheStructKeys(t *testing.T) {
	type key struct {
		expr string
		kind int
	}
	c := New[key, *int](2, math.MaxInt64)
	one, two := 1, 2
	c.Put(key{"z > 2.0", 0}, &one, 1)
	c.Put(key{"z > 2.0", 1}, &two, 1)
	if v, ok := c.Get(key{"z > 2.0", 1}); !ok || *v != 2 {
		t.Errorf("Get = %v, %v", v, ok)
	}
}

// TestCacheConcurrent runs Get, Put and Remove from many goroutines (run
// with -race) and checks the limits hold afterwards.
func TestCacheConcurrent(t *testing.T) {
	c := New[int, int](50, 400)
	var wg sync.WaitGroup
	for g := range 8 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range 2000 {
				k := (i * (g + 1)) % 97
				switch i % 3 {
				case 0:
					c.Put(k, i, int64(k%13))
				case 1:
					c.Get(k)
				default:
					c.Remove(k + 1)
				}
			}
		}()
	}
	wg.Wait()
	if c.Len() > 50 || c.Bytes() > 400 || c.Bytes() < 0 {
		t.Errorf("after concurrent use: %d entries, %d bytes", c.Len(), c.Bytes())
	}
	// The byte count matches the entries kept.
	var sum int64
	for e := c.head.next; e != &c.head; e = e.next {
		sum += e.size
	}
	if sum != c.Bytes() {
		t.Errorf("entries add up to %d bytes; the count says %d", sum, c.Bytes())
	}
}

// TestGetOrAdd: of many callers asking for one new key at once, one adds
// it and all get the same value; a kept key is not added again.
func TestGetOrAdd(t *testing.T) {
	c := New[string, *int](4, math.MaxInt64)
	var adds, found int
	var mu sync.Mutex
	var wg sync.WaitGroup
	got := make([]*int, 16)
	for g := range got {
		wg.Add(1)
		go func() {
			defer wg.Done()
			v, ok := c.GetOrAdd("rule", func() (*int, int64) {
				mu.Lock()
				adds++
				mu.Unlock()
				return new(int), 1
			})
			mu.Lock()
			if ok {
				found++
			}
			mu.Unlock()
			got[g] = v
		}()
	}
	wg.Wait()
	if adds != 1 || found != len(got)-1 {
		t.Errorf("%d adds, %d found; want 1 and %d", adds, found, len(got)-1)
	}
	for _, v := range got {
		if v != got[0] {
			t.Fatal("callers got different values")
		}
	}
	// A disabled cache makes the value every time and keeps nothing.
	d := New[string, int](0, 10)
	if v, ok := d.GetOrAdd("x", func() (int, int64) { return 7, 1 }); v != 7 || ok || d.Len() != 0 {
		t.Errorf("disabled cache: %d, %v, len %d", v, ok, d.Len())
	}
}

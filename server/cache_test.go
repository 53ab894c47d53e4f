package server

import (
	"fmt"
	"testing"
)

func TestLRU(t *testing.T) {
	c := newLRU[int](3, 100)
	for i := range 3 {
		c.put(fmt.Sprint(i), i, 10)
	}
	c.get("0") // 0 is now the most recent; 1 the least
	c.put("3", 3, 10)
	if _, ok := c.get("1"); ok {
		t.Error("least recently used entry kept past the count limit")
	}
	for _, k := range []string{"0", "2", "3"} {
		if v, ok := c.get(k); !ok || fmt.Sprint(v) != k {
			t.Errorf("get(%s) = %v, %v", k, v, ok)
		}
	}
	c.put("big", 9, 75) // 30 + 75 > 100: evicts until it fits
	if c.len() != 3 || c.bytes > 100 {
		t.Errorf("after a big entry: %d entries, %d bytes", c.len(), c.bytes)
	}
	if _, ok := c.get("0"); ok {
		t.Error("byte limit not enforced (oldest entry kept)")
	}
	c.put("huge", 1, 101)
	if _, ok := c.get("huge"); ok {
		t.Error("entry larger than the budget kept")
	}
	c.put("3", 33, 5) // update in place
	if v, _ := c.get("3"); v != 33 {
		t.Errorf("update: %d", v)
	}
	c.remove("3")
	if _, ok := c.get("3"); ok || c.len() != 2 {
		t.Errorf("remove: len %d", c.len())
	}
}

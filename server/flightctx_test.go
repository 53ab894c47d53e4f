package server

import (
	"context"
	"errors"
	"sync/atomic"
	"testing"
	"time"

	"veer/server/servertest"
)

func TestFlightCtx(t *testing.T) {
	t.Run("deadline without Done", func(t *testing.T) {
		var c flightCtx
		c.init(context.Background(), 20*time.Millisecond)
		if c.Err() != nil {
			t.Fatal("ended early")
		}
		if d, ok := c.Deadline(); !ok || time.Until(d) > 20*time.Millisecond {
			t.Errorf("Deadline = %v, %v", d, ok)
		}
		time.Sleep(30 * time.Millisecond)
		if !errors.Is(c.Err(), context.DeadlineExceeded) {
			t.Errorf("Err after deadline = %v", c.Err())
		}
		select {
		case <-c.Done():
		default:
			t.Error("Done not closed after the deadline passed")
		}
	})
	t.Run("deadline with Done", func(t *testing.T) {
		var c flightCtx
		c.init(context.Background(), 20*time.Millisecond)
		select {
		case <-c.Done():
		case <-time.After(2 * time.Second):
			t.Fatal("Done not closed at the deadline")
		}
		if !errors.Is(c.Err(), context.DeadlineExceeded) {
			t.Errorf("Err = %v", c.Err())
		}
	})
	t.Run("cancel and derived contexts", func(t *testing.T) {
		var c flightCtx
		c.init(context.Background(), time.Minute)
		child, stop := context.WithCancel(&c)
		defer stop()
		var ran atomic.Bool
		context.AfterFunc(&c, func() { ran.Store(true) })
		c.cancel()
		select {
		case <-child.Done():
		case <-time.After(2 * time.Second):
			t.Fatal("derived context not cancelled")
		}
		if !errors.Is(c.Err(), context.Canceled) || !errors.Is(child.Err(), context.Canceled) {
			t.Errorf("Err = %v, child %v", c.Err(), child.Err())
		}
		servertest.Eventually(t, 2*time.Second, "AfterFunc to run", ran.Load)
		c.end(context.DeadlineExceeded)
		if !errors.Is(c.Err(), context.Canceled) {
			t.Error("first reason did not stick")
		}
	})
	t.Run("base cancelled", func(t *testing.T) {
		base, cancel := context.WithCancel(context.Background())
		var c flightCtx
		c.init(base, time.Minute)
		done := c.Done()
		cancel()
		select {
		case <-done:
		case <-time.After(2 * time.Second):
			t.Fatal("not cancelled with its base")
		}
		var c2 flightCtx
		c2.init(base, time.Minute)
		if !errors.Is(c2.Err(), context.Canceled) {
			t.Errorf("Err with a dead base = %v", c2.Err())
		}
	})
	t.Run("stopped AfterFunc does not run", func(t *testing.T) {
		var c flightCtx
		c.init(context.Background(), time.Minute)
		var ran atomic.Bool
		stop := c.AfterFunc(func() { ran.Store(true) })
		if !stop() || stop() {
			t.Error("stop should succeed once")
		}
		c.cancel()
		time.Sleep(10 * time.Millisecond)
		if ran.Load() {
			t.Error("stopped function ran")
		}
	})
}

func TestCallCtx(t *testing.T) {
	var c callCtx
	if c.Err() != nil {
		t.Fatal("new callCtx ended")
	}
	left := 0
	c.setLeave(func() { left++ })
	if !c.clearLeave() || left != 0 {
		t.Error("clearLeave before cancel")
	}
	c.setLeave(func() { left++ })
	d := c.Done()
	c.cancel()
	c.cancel()
	if left != 1 || c.clearLeave() {
		t.Errorf("leave ran %d times; clearLeave after it ran must be false", left)
	}
	select {
	case <-d:
	default:
		t.Error("Done not closed")
	}
	c.setLeave(func() { left++ })
	if left != 2 {
		t.Error("setLeave on a cancelled call must run the function at once")
	}
}

package server

import (
	"context"
	"sync"
	"time"
)

// flightCtx is the context of one computation. It ends when its time limit
// passes, when every caller waiting for the result has gone (cancel), or
// when the server abandons work (its base context ends).
//
// It is hand-written rather than context.WithTimeout because most cell
// functions are cheap and never wait on their context: the done channel,
// the timer and the link to the base context are made only when Done or
// AfterFunc is first called, so a cheap call pays for none of them. Err
// checks the clock directly.
type flightCtx struct {
	base     context.Context
	deadline time.Time

	mu       sync.Mutex
	err      error
	done     chan struct{}
	timer    *time.Timer
	stopBase func() bool
	funcs    map[*afterFn]struct{}
}

type afterFn struct{ f func() }

var closedChan = func() chan struct{} { c := make(chan struct{}); close(c); return c }()

func (c *flightCtx) init(base context.Context, timeout time.Duration) {
	c.base, c.deadline = base, time.Now().Add(timeout)
}

func (c *flightCtx) Deadline() (time.Time, bool) { return c.deadline, true }

func (c *flightCtx) Value(key any) any { return c.base.Value(key) }

// Err reports why the context ended, checking the deadline and the base
// context first.
func (c *flightCtx) Err() error {
	c.mu.Lock()
	err := c.err
	c.mu.Unlock()
	if err != nil {
		return err
	}
	switch {
	case !time.Now().Before(c.deadline):
		c.end(context.DeadlineExceeded)
	case c.base.Err() != nil:
		c.end(context.Canceled)
	default:
		return nil
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.err
}

// Done returns a channel closed when the context ends; the first call arms
// the timer and the link to the base context.
func (c *flightCtx) Done() <-chan struct{} {
	c.mu.Lock()
	if c.done != nil {
		d := c.done
		c.mu.Unlock()
		return d
	}
	if c.err != nil {
		c.done = closedChan
		c.mu.Unlock()
		return c.done
	}
	c.done = make(chan struct{})
	d := c.done
	c.timer = time.AfterFunc(time.Until(c.deadline), func() { c.end(context.DeadlineExceeded) })
	c.mu.Unlock()
	stop := context.AfterFunc(c.base, func() { c.end(context.Canceled) })
	c.mu.Lock()
	if c.err != nil {
		c.mu.Unlock()
		stop()
		return d
	}
	c.stopBase = stop
	c.mu.Unlock()
	return d
}

// AfterFunc lets contexts derived from this one (context.WithCancel(ctx))
// follow it without a goroutine each.
func (c *flightCtx) AfterFunc(f func()) (stop func() bool) {
	c.Done() // arm
	a := &afterFn{f: f}
	c.mu.Lock()
	if c.err != nil {
		c.mu.Unlock()
		go f()
		return func() bool { return false }
	}
	if c.funcs == nil {
		c.funcs = map[*afterFn]struct{}{}
	}
	c.funcs[a] = struct{}{}
	c.mu.Unlock()
	return func() bool {
		c.mu.Lock()
		defer c.mu.Unlock()
		if _, ok := c.funcs[a]; ok {
			delete(c.funcs, a)
			return true
		}
		return false
	}
}

// end ends the context with err (the first reason wins).
func (c *flightCtx) end(err error) {
	c.mu.Lock()
	if c.err != nil {
		c.mu.Unlock()
		return
	}
	c.err = err
	if c.done != nil && c.done != closedChan {
		close(c.done)
	}
	funcs := c.funcs
	c.funcs = nil
	c.mu.Unlock()
	c.release()
	for a := range funcs {
		go a.f()
	}
}

// cancel ends the context because nobody waits for the result any more.
func (c *flightCtx) cancel() { c.end(context.Canceled) }

// release stops the timer and the base link once the computation is over.
func (c *flightCtx) release() {
	c.mu.Lock()
	t, sb := c.timer, c.stopBase
	c.timer, c.stopBase = nil, nil
	c.mu.Unlock()
	if t != nil {
		t.Stop()
	}
	if sb != nil {
		sb()
	}
}

// callCtx is the context of one websocket call. It is cancelled by a cancel
// message, by a new call with the same id, or by its connection closing (the
// connection cancels its live calls itself, so there is no parent link).
// Hand-written for the same reason as flightCtx: thousands of cheap calls a
// second should not each pay for a channel, a parent registration and an
// AfterFunc.
type callCtx struct {
	mu    sync.Mutex
	err   error
	done  chan struct{}
	leave func()
	ran   bool
}

func (c *callCtx) Deadline() (time.Time, bool) { return time.Time{}, false }

func (c *callCtx) Value(any) any { return nil }

func (c *callCtx) Err() error {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.err
}

func (c *callCtx) Done() <-chan struct{} {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.done == nil {
		if c.err != nil {
			c.done = closedChan
		} else {
			c.done = make(chan struct{})
		}
	}
	return c.done
}

// cancel ends the call; a registered leave function runs once.
func (c *callCtx) cancel() {
	c.mu.Lock()
	if c.err != nil {
		c.mu.Unlock()
		return
	}
	c.err = context.Canceled
	if c.done != nil && c.done != closedChan {
		close(c.done)
	}
	f := c.leave
	c.leave = nil
	if f != nil {
		c.ran = true
	}
	c.mu.Unlock()
	if f != nil {
		f()
	}
}

// setLeave implements leaveHook.
func (c *callCtx) setLeave(f func()) {
	c.mu.Lock()
	if c.err != nil {
		c.ran = true
		c.mu.Unlock()
		f()
		return
	}
	c.leave, c.ran = f, false
	c.mu.Unlock()
}

// clearLeave implements leaveHook.
func (c *callCtx) clearLeave() bool {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.leave = nil
	return !c.ran
}

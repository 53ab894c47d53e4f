package server

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"sync"
	"sync/atomic"
	"time"

	"github.com/gorilla/websocket"

	"veer/functions/cell"
)

const (
	wsWriteWait  = 10 * time.Second
	wsPongWait   = 75 * time.Second
	wsPingPeriod = 30 * time.Second
	// progress messages: at most one per call every progressEvery, and only
	// when at least progressStep more is done.
	progressEvery = 100 * time.Millisecond
	progressStep  = 0.01
)

// wsConn is one websocket connection.
type wsConn struct {
	s *Server
	c *websocket.Conn

	out        chan []byte
	writerDead chan struct{} // closed when the writer stops
	writerDone chan struct{}

	ctx    context.Context // cancelled when the connection's calls must stop
	cancel context.CancelFunc

	authorized atomic.Bool
	slots      chan struct{}
	wg         sync.WaitGroup // message handlers and update runs

	mu       sync.Mutex
	closed   bool // no new handlers or updates
	shutdown bool // the server is shutting down: finish calls, then close
	dead     bool // calls are cancelled as they register
	calls    map[string]*wsCall
	anon     map[*wsCall]struct{} // live calls without an id
	subs     int

	msgs, bytesIn atomic.Int64
}

// wsCall is a call in progress or a live subscription, by id.
type wsCall struct {
	conn *wsConn
	id   []byte
	req  request
	cctx callCtx

	// guarded by conn.mu
	subscribed bool
	reads      []string
	answered   bool

	umu     sync.Mutex // update loop state
	running bool
	dirty   bool

	pmu      sync.Mutex // progress throttle
	lastSent time.Time
	lastP    float64
}

func (s *Server) handleWS(w http.ResponseWriter, r *http.Request) {
	s.mu.Lock()
	closing := s.closing
	s.mu.Unlock()
	if closing {
		writeTransportError(w, http.StatusServiceUnavailable, "the server is shutting down")
		return
	}
	c, err := s.upgrader.Upgrade(w, r, nil)
	if err != nil {
		return // the upgrader has answered
	}
	conn := &wsConn{
		s: s, c: c,
		out:        make(chan []byte, 1024),
		writerDead: make(chan struct{}),
		writerDone: make(chan struct{}),
		slots:      make(chan struct{}, s.lim.MaxInflightPerConn),
		calls:      map[string]*wsCall{},
		anon:       map[*wsCall]struct{}{},
	}
	conn.ctx, conn.cancel = context.WithCancel(s.base)
	s.mu.Lock()
	if s.closing {
		s.mu.Unlock()
		c.WriteControl(websocket.CloseMessage, websocket.FormatCloseMessage(websocket.CloseGoingAway, "server shutting down"), time.Now().Add(time.Second))
		c.Close()
		return
	}
	s.conns[conn] = struct{}{}
	s.connDone.Add(1)
	s.mu.Unlock()
	start := time.Now()
	s.log.Debug("websocket open")
	go conn.writer()
	conn.reader()
	conn.finish()
	s.mu.Lock()
	delete(s.conns, conn)
	s.mu.Unlock()
	s.connDone.Done()
	s.log.Debug("websocket closed", "messages", conn.msgs.Load(), "bytes_in", conn.bytesIn.Load(), "seconds", time.Since(start).Seconds())
}

// stopReading makes the reader return (graceful shutdown); calls in
// progress still finish and are answered.
func (conn *wsConn) stopReading() {
	conn.mu.Lock()
	conn.shutdown = true
	conn.mu.Unlock()
	conn.c.SetReadDeadline(time.Now())
}

// reader reads frames until the connection ends.
func (conn *wsConn) reader() {
	c := conn.c
	lim := conn.s.lim.MaxRequestBytes
	c.SetReadDeadline(time.Now().Add(wsPongWait))
	c.SetPongHandler(func(string) error {
		conn.mu.Lock()
		sd := conn.shutdown
		conn.mu.Unlock()
		if !sd {
			c.SetReadDeadline(time.Now().Add(wsPongWait))
		}
		return nil
	})
	for {
		_, rd, err := c.NextReader()
		if err != nil {
			return
		}
		data, err := io.ReadAll(io.LimitReader(rd, lim+1))
		if err != nil {
			return
		}
		if int64(len(data)) > lim {
			conn.s.log.Warn("websocket frame too large; closing the connection", "limit_bytes", lim)
			conn.closeWith(websocket.CloseMessageTooBig, fmt.Sprintf("frame larger than the %s limit; split the batch", byteSize(lim)))
			return
		}
		conn.mu.Lock()
		sd := conn.shutdown
		conn.mu.Unlock()
		if !sd {
			c.SetReadDeadline(time.Now().Add(wsPongWait))
		}
		conn.msgs.Add(1)
		conn.bytesIn.Add(int64(len(data)))
		reqs, batch, derr := decodeRequests(data, conn.s.decodeLimits())
		if derr != nil {
			conn.send(appendAnswer(nil, nil, nil, cell.WrongArgument.Errorf("%s", derr.Error()), false))
			continue
		}
		if !batch && conn.inline(&reqs[0]) {
			continue
		}
		select {
		case conn.slots <- struct{}{}:
		case <-conn.ctx.Done():
			return
		}
		if !conn.spawn(func() {
			defer func() { <-conn.slots }()
			if batch {
				conn.handleBatch(reqs)
			} else {
				res, again := conn.handle(&reqs[0], false)
				conn.send(res.appendTo(nil))
				if again != nil {
					again.trigger()
				}
			}
		}) {
			return
		}
	}
}

// closeWith sends a close frame with a reason.
func (conn *wsConn) closeWith(code int, reason string) {
	if len(reason) > 120 {
		reason = reason[:120]
	}
	conn.c.WriteControl(websocket.CloseMessage, websocket.FormatCloseMessage(code, reason), time.Now().Add(wsWriteWait))
}

// spawn runs fn on a tracked goroutine unless the connection is closing.
func (conn *wsConn) spawn(fn func()) bool {
	conn.mu.Lock()
	if conn.closed {
		conn.mu.Unlock()
		return false
	}
	conn.wg.Add(1)
	conn.mu.Unlock()
	go func() {
		defer conn.wg.Done()
		fn()
	}()
	return true
}

// finish ends the connection: on a client disconnect calls are cancelled at
// once; on server shutdown they finish and are answered first.
func (conn *wsConn) finish() {
	conn.mu.Lock()
	graceful := conn.shutdown
	conn.mu.Unlock()
	if !graceful {
		conn.cancel()
		conn.cancelAll()
	}
	conn.mu.Lock()
	conn.closed = true
	conn.mu.Unlock()
	conn.wg.Wait()
	conn.cancel()
	conn.cancelAll()
	close(conn.out)
	<-conn.writerDone
	conn.c.Close()
}

// cancelAll cancels every live call and subscription; calls registering
// later are cancelled at once.
func (conn *wsConn) cancelAll() {
	conn.mu.Lock()
	conn.dead = true
	live := make([]*wsCall, 0, len(conn.calls)+len(conn.anon))
	for _, c := range conn.calls {
		live = append(live, c)
	}
	for c := range conn.anon {
		live = append(live, c)
	}
	clear(conn.calls)
	clear(conn.anon)
	conn.subs = 0
	conn.mu.Unlock()
	for _, c := range live {
		c.cctx.cancel()
	}
}

// writer sends frames and pings; the only goroutine writing data frames.
func (conn *wsConn) writer() {
	defer close(conn.writerDone)
	c := conn.c
	ticker := time.NewTicker(wsPingPeriod)
	defer ticker.Stop()
	dead := false
	markDead := func() {
		if !dead {
			dead = true
			close(conn.writerDead)
			conn.cancel()
			c.Close() // unblocks the reader
		}
	}
	for {
		select {
		case b, ok := <-conn.out:
			if !ok {
				if !dead {
					msg := ""
					code := websocket.CloseNormalClosure
					conn.mu.Lock()
					if conn.shutdown {
						code, msg = websocket.CloseGoingAway, "server shutting down"
					}
					conn.mu.Unlock()
					c.WriteControl(websocket.CloseMessage, websocket.FormatCloseMessage(code, msg), time.Now().Add(time.Second))
				}
				return
			}
			if dead {
				continue // drain
			}
			c.SetWriteDeadline(time.Now().Add(wsWriteWait))
			if err := c.WriteMessage(websocket.TextMessage, b); err != nil {
				markDead()
			}
		case <-ticker.C:
			if !dead {
				if err := c.WriteControl(websocket.PingMessage, nil, time.Now().Add(wsWriteWait)); err != nil && !errors.Is(err, net.ErrClosed) {
					markDead()
				}
			}
		}
	}
}

// send queues a frame; it gives up when the writer has stopped.
func (conn *wsConn) send(b []byte) {
	if b == nil {
		return
	}
	select {
	case conn.out <- b:
	case <-conn.writerDead:
	}
}

// trySend queues a frame unless the queue is full (for progress messages).
func (conn *wsConn) trySend(b []byte) {
	select {
	case conn.out <- b:
	default:
	}
}

// inline handles messages that need no computation on the reader
// goroutine: cancels and token-only messages. It reports whether it did.
func (conn *wsConn) inline(req *request) bool {
	switch {
	case req.shape == nil && req.cancel != nil && req.fn == "":
		conn.send(conn.cancelCall(req.cancel))
		return true
	case req.shape == nil && req.fn == "" && req.token != "":
		conn.send(conn.tokenOnly(req))
		return true
	}
	return false
}

func (conn *wsConn) tokenOnly(req *request) []byte {
	if tokenOK(conn.s.token, req.token) {
		conn.authorized.Store(true)
		return appendAnswer(nil, req.id, []byte("true"), nil, false)
	}
	return appendAnswer(nil, req.id, nil, cell.WrongArgument.Errorf("the token is wrong: run `veer token` and paste it into the add-in settings"), false)
}

// cancelCall cancels a call in progress or a subscription by id and answers
// {"id": ..., "cancelled": true}, or false when no such call is active (it
// had already been answered).
func (conn *wsConn) cancelCall(id []byte) []byte {
	conn.mu.Lock()
	call := conn.calls[string(id)]
	if call != nil {
		delete(conn.calls, string(id))
		if call.subscribed {
			conn.subs--
		}
	}
	conn.mu.Unlock()
	if call == nil {
		return appendCancelled(nil, id, false)
	}
	call.cctx.cancel()
	return appendCancelled(nil, id, true)
}

// wsResult is what a message is answered with.
type wsResult struct {
	raw       []byte   // a ready answer (cancel acks, token answers)
	out       *outcome // or a call's outcome
	id        []byte
	cancelled bool // or "cancelled": true
}

func (r wsResult) appendTo(b []byte) []byte {
	switch {
	case r.raw != nil:
		return append(b, r.raw...)
	case r.cancelled:
		return appendCancelled(b, r.id, true)
	case r.out != nil:
		return appendAnswer(b, r.id, r.out.val, r.out.err, false)
	}
	return b
}

// handleBatch answers a batch in one frame, in order.
func (conn *wsConn) handleBatch(reqs []request) {
	results := make([]wsResult, len(reqs))
	again := make([]*wsCall, len(reqs))
	conn.s.runBatch(len(reqs), func(i int) bool { return conn.s.slowCall(&reqs[i]) }, func(i int) {
		req := &reqs[i]
		switch {
		case req.shape == nil && req.cancel != nil && req.fn == "":
			results[i].raw = conn.cancelCall(req.cancel)
		case req.shape == nil && req.fn == "" && req.token != "":
			results[i].raw = conn.tokenOnly(req)
		default:
			results[i], again[i] = conn.handle(req, true)
		}
	})
	n := 2
	for _, r := range results {
		n += len(r.id) + len(r.raw) + 16
		if r.out != nil {
			n += len(r.out.val) + 16
			if r.out.err != nil {
				n += len(r.out.err.Message) + 40
			}
		}
	}
	b := make([]byte, 0, n)
	b = append(b, '[')
	for i, r := range results {
		if i > 0 {
			b = append(b, ',')
		}
		b = r.appendTo(b)
	}
	conn.send(append(b, ']'))
	for _, c := range again {
		if c != nil {
			c.trigger()
		}
	}
}

// handle runs one call and returns its answer. A call cancelled by the
// client gets no answer (the cancel was acknowledged), except inside a batch
// where every position is answered ({"id": ..., "cancelled": true}). again is
// a new subscription to trigger once the answer is sent, because a model it
// read changed meanwhile.
func (conn *wsConn) handle(req *request, inBatch bool) (res wsResult, again *wsCall) {
	if req.token != "" && tokenOK(conn.s.token, req.token) {
		conn.authorized.Store(true)
	}
	call := conn.register(req)
	opts := callOpts{needToken: conn.s.cfg.AllowRemote, authorized: conn.authorized.Load()}
	if call.id != nil {
		opts.progress = call
	}
	out := conn.s.eng.call(&call.cctx, req, opts)

	conn.mu.Lock()
	cancelled := call.cctx.Err() != nil
	call.answered = true
	subscribe := !cancelled && call.id != nil && req.subscribe && out.fn != nil && out.fn.Streaming && len(out.reads) > 0 && conn.subs < conn.s.lim.MaxSubscriptionsPerConn && !conn.closed && conn.calls[string(call.id)] == call
	if subscribe {
		call.subscribed = true
		call.reads = out.reads
		call.id = bytes.Clone(call.id) // do not keep the whole frame alive
		conn.subs++
	} else if call.id != nil {
		if conn.calls[string(call.id)] == call {
			delete(conn.calls, string(call.id))
		}
	} else {
		delete(conn.anon, call)
	}
	conn.mu.Unlock()

	res.id = req.id
	if cancelled {
		call.cctx.cancel()
		res.cancelled = inBatch
		return res, nil
	}
	res.out = out
	if subscribe {
		// A model may have changed between the computation and the
		// subscription: answer again at once if so.
		for _, d := range out.deps {
			if h, _ := conn.s.reg.Resolve(d.ref); h != d.handle {
				again = call
				break
			}
		}
	} else {
		call.cctx.cancel()
	}
	return res, again
}

// register records a call by id so that it can be cancelled; a new call
// with the id of an active one replaces (cancels) it.
func (conn *wsConn) register(req *request) *wsCall {
	call := &wsCall{conn: conn, id: req.id, req: *req}
	conn.mu.Lock()
	if conn.dead {
		conn.mu.Unlock()
		call.cctx.cancel()
		return call
	}
	var old *wsCall
	if req.id == nil {
		conn.anon[call] = struct{}{}
	} else {
		old = conn.calls[string(req.id)]
		conn.calls[string(req.id)] = call
		if old != nil && old.subscribed {
			conn.subs--
		}
	}
	conn.mu.Unlock()
	if old != nil {
		old.cctx.cancel()
	}
	return call
}

// progress sends throttled progress messages while the call is unanswered.
func (call *wsCall) progress(p float64) {
	call.pmu.Lock()
	now := time.Now()
	if p < call.lastP+progressStep || (!call.lastSent.IsZero() && now.Sub(call.lastSent) < progressEvery) {
		call.pmu.Unlock()
		return
	}
	call.lastSent, call.lastP = now, p
	call.pmu.Unlock()
	conn := call.conn
	conn.mu.Lock()
	live := !call.answered && call.cctx.Err() == nil
	conn.mu.Unlock()
	if live {
		conn.trySend(appendProgress(nil, call.id, p))
	}
}

// modelChanged triggers the subscriptions that read the model.
func (conn *wsConn) modelChanged(key string) {
	var hit []*wsCall
	conn.mu.Lock()
	for _, call := range conn.calls {
		if !call.subscribed {
			continue
		}
		for _, r := range call.reads {
			if r == key {
				hit = append(hit, call)
				break
			}
		}
	}
	conn.mu.Unlock()
	for _, call := range hit {
		call.trigger()
	}
}

// trigger recomputes a subscribed call and sends the new answer with
// "update": true. Triggers during a recomputation coalesce into one more.
func (call *wsCall) trigger() {
	call.umu.Lock()
	if call.running {
		call.dirty = true
		call.umu.Unlock()
		return
	}
	call.running = true
	call.umu.Unlock()
	if !call.conn.spawn(call.updateLoop) {
		call.umu.Lock()
		call.running = false
		call.umu.Unlock()
	}
}

func (call *wsCall) updateLoop() {
	conn := call.conn
	for {
		if call.cctx.Err() != nil {
			return
		}
		opts := callOpts{needToken: conn.s.cfg.AllowRemote, authorized: conn.authorized.Load()}
		out := conn.s.eng.call(&call.cctx, &call.req, opts)
		if call.cctx.Err() != nil {
			return
		}
		conn.mu.Lock()
		if len(out.reads) > 0 {
			call.reads = out.reads
		}
		conn.mu.Unlock()
		conn.send(appendAnswer(nil, call.id, out.val, out.err, true))
		call.umu.Lock()
		if !call.dirty {
			call.running = false
			call.umu.Unlock()
			return
		}
		call.dirty = false
		call.umu.Unlock()
	}
}

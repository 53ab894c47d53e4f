package server

import (
	"context"
	"crypto/sha256"
	"encoding/binary"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"runtime"
	"strconv"
	"strings"
	"sync"
	"time"

	"veer/functions/cell"
	"veer/internal/lru"
)

// engine runs calls: validation, result cache, sharing of identical
// computations, the concurrency limit and the time limit.
type engine struct {
	cat *cell.Catalogue
	reg *Registry
	lim Limits
	log *slog.Logger

	base context.Context // cancelled when in-flight work must be abandoned
	// quick and slow are the computation slots of the two lanes (see
	// Limits.MaxConcurrent).
	quick, slow chan struct{}

	results *lru.Cache[string, *outcome]
	onceVal *lru.Cache[string, any]

	mu          sync.Mutex
	flights     map[string]*flight
	onceFlights map[string]*onceFlight
}

// dep is a model reference a result depends on: ref as the function named it
// (lower case; bare name or handle) and the handle it resolved to ("" when it
// did not exist). A result stays valid while every ref resolves the same.
type dep struct {
	ref    string
	handle string
}

// outcome is the answer to one call.
type outcome struct {
	val   []byte      // encoded JSON value, when err is nil
	err   *cell.Error // the error answer
	deps  []dep
	reads []string // bare model names read (for streaming)
	fn    *cell.Func
}

// callOpts carry per-caller facts.
type callOpts struct {
	needToken  bool         // every call needs the token (remote access allowed)
	authorized bool         // a valid install token came with the call
	tokenSent  bool         // some token came with the call (in a header)
	progress   progressSink // receives progress reports, or nil
}

func newEngine(cat *cell.Catalogue, reg *Registry, lim Limits, log *slog.Logger, base context.Context) *engine {
	return &engine{
		cat: cat, reg: reg, lim: lim, log: log, base: base,
		quick:       make(chan struct{}, lim.MaxConcurrent),
		slow:        make(chan struct{}, lim.MaxConcurrentSlow),
		results:     lru.New[string, *outcome](lim.CacheEntries, lim.CacheBytes),
		onceVal:     lru.New[string, any](lim.OnceEntries, math.MaxInt64),
		flights:     map[string]*flight{},
		onceFlights: map[string]*onceFlight{},
	}
}

func errOutcome(e *cell.Error) *outcome { return &outcome{err: e} }

// call answers one decoded request.
func (e *engine) call(ctx context.Context, req *request, opts callOpts) *outcome {
	if req.fn == "" && req.shape == nil {
		return errOutcome(cell.WrongArgument.Errorf("the call has no \"fn\" (function name)"))
	}
	if opts.needToken && !opts.authorized {
		return errOutcome(cell.WrongArgument.Errorf("%s", "this server accepts calls from other computers, so every call needs the install token: run `veer token` and paste it into the add-in settings (HTTP: header "+TokenHeader+"; websocket: a {\"token\": ...} message)"))
	}
	f, ok := e.cat.Lookup(req.fn)
	if req.shape != nil {
		msg := req.shape.msg
		if req.shape.arg >= 0 {
			arg := "argument " + strconv.Itoa(req.shape.arg+1)
			if ok {
				arg = "argument " + f.ArgName(req.shape.arg)
			}
			msg = arg + ": " + msg
		}
		e := cell.WrongArgument.Errorf("%s", msg)
		if ok {
			e = e.In(f.Name)
		}
		return errOutcome(e)
	}
	if !ok {
		return errOutcome(cell.UnknownFunction.Errorf("unknown function %s; GET /v1/functions lists the functions", quoteName(req.fn)))
	}
	cells := 0
	for i, v := range req.args {
		rows, cols := v.Dims()
		cells += rows * cols
		if rows == 1 {
			rows = cols
		}
		if rows > e.lim.MaxRows {
			return errOutcome(cell.WrongArgument.Errorf("argument %s has %d rows; the limit is %d rows per argument", f.ArgName(i), rows, e.lim.MaxRows).In(f.Name))
		}
	}
	args, err := cell.Bind(f, req.args)
	if err != nil {
		return errOutcome(cell.AsError(err).In(f.Name))
	}
	if f.Writes && !opts.authorized {
		msg := "the function saves models and needs the install token: run `veer token` and paste it into the add-in settings (HTTP: header " + TokenHeader + ")"
		if req.token != "" || opts.tokenSent {
			msg = "the function saves models and the token sent is wrong: run `veer token` and paste it into the add-in settings"
		}
		return errOutcome(cell.WrongArgument.Errorf("%s", msg).In(f.Name))
	}
	key := cacheKey(f, args)
	if o, ok := e.results.Get(key); ok && e.valid(o.deps) {
		return o
	}
	return e.shared(ctx, key, f, args, opts, f.Slow || cells > e.lim.QuickCells)
}

// valid reports whether every model a result depends on still resolves to
// the same version.
func (e *engine) valid(deps []dep) bool {
	for _, d := range deps {
		if d.ref == listDep {
			if listKey(e.reg.List()) != d.handle {
				return false
			}
			continue
		}
		h, _ := e.reg.Resolve(d.ref)
		if h != d.handle {
			return false
		}
	}
	return true
}

// progressSink receives progress reports of a computation.
type progressSink interface{ progress(done float64) }

// leaveHook is implemented by contexts that can tell the engine directly
// when their caller goes away (cheaper than context.AfterFunc).
type leaveHook interface {
	setLeave(f func())
	clearLeave() bool // false if f has run or is running
}

// flight is one computation shared by all identical concurrent calls.
type flight struct {
	ctx     flightCtx
	env     callEnv
	out     *outcome
	done    chan struct{} // made when a second caller joins; guarded by engine.mu
	waiters int           // guarded by engine.mu
	pmu     sync.Mutex
	p0      progressSink
	plisten []progressSink
	last    float64
}

func (fl *flight) addListener(p progressSink) {
	if p == nil {
		return
	}
	fl.pmu.Lock()
	if fl.p0 == nil {
		fl.p0 = p
	} else {
		fl.plisten = append(fl.plisten, p)
	}
	fl.pmu.Unlock()
}

func (fl *flight) progress(p float64) {
	if math.IsNaN(p) {
		return
	}
	p = min(max(p, 0), 1)
	fl.pmu.Lock()
	if p <= fl.last {
		fl.pmu.Unlock()
		return
	}
	fl.last = p
	p0 := fl.p0
	ls := make([]progressSink, len(fl.plisten))
	copy(ls, fl.plisten)
	fl.pmu.Unlock()
	if p0 != nil {
		p0.progress(p)
	}
	for _, l := range ls {
		l.progress(p)
	}
}

// shared joins or starts the computation for key and waits for it or for
// ctx. The first caller computes on its own goroutine; a computation is
// cancelled only when every caller waiting for it has gone.
func (e *engine) shared(ctx context.Context, key string, f *cell.Func, args cell.Args, opts callOpts, slow bool) *outcome {
	e.mu.Lock()
	if fl := e.flights[key]; fl != nil {
		fl.waiters++
		if fl.done == nil {
			fl.done = make(chan struct{})
		}
		done := fl.done
		fl.addListener(opts.progress)
		e.mu.Unlock()
		select {
		case <-done:
			return fl.out
		case <-ctx.Done():
			e.leave(key, fl)
			return errOutcome(cell.Busy.Errorf("the call was cancelled").In(f.Name))
		}
	}
	timeout := e.lim.CallTimeout
	if f.Slow {
		timeout = e.lim.SlowCallTimeout
	}
	fl := &flight{waiters: 1}
	fl.ctx.init(e.base, timeout)
	fl.addListener(opts.progress)
	e.flights[key] = fl
	e.mu.Unlock()
	// The first caller computes on its own goroutine. If it goes away, it
	// leaves like any waiter.
	leave := func() { e.leave(key, fl) }
	left := false
	if lh, ok := ctx.(leaveHook); ok {
		lh.setLeave(leave)
		e.run(&fl.ctx, fl, key, f, args, timeout, slow)
		left = !lh.clearLeave()
	} else if ctx.Done() != nil {
		stop := context.AfterFunc(ctx, leave)
		e.run(&fl.ctx, fl, key, f, args, timeout, slow)
		left = !stop()
	} else {
		e.run(&fl.ctx, fl, key, f, args, timeout, slow)
	}
	if left {
		return errOutcome(cell.Busy.Errorf("the call was cancelled").In(f.Name))
	}
	return fl.out
}

// leave records that a caller stopped waiting for fl; the last one to leave
// cancels the computation.
func (e *engine) leave(key string, fl *flight) {
	e.mu.Lock()
	defer e.mu.Unlock()
	fl.waiters--
	if fl.waiters == 0 {
		fl.ctx.cancel()
		if e.flights[key] == fl {
			delete(e.flights, key) // later callers start afresh
		}
	}
}

// run computes one flight. It is where a call's errors get their context:
// the error of the call and the errors inside its result name the function
// once (cell.Error.In, cell.EncodeResult); cell functions never name
// themselves.
func (e *engine) run(ctx *flightCtx, fl *flight, key string, f *cell.Func, args cell.Args, timeout time.Duration, slow bool) {
	defer ctx.release()
	start := time.Now()
	env := &fl.env
	env.e, env.f, env.ctx, env.fl = e, f, ctx, fl
	out := &outcome{fn: f}
	// Take a computation slot of the call's lane without arming the
	// context when one is free.
	sem, lane := e.quick, "quick"
	if slow {
		sem, lane = e.slow, "slow"
	}
	acquired := false
	select {
	case sem <- struct{}{}:
		acquired = true
	default:
		select {
		case sem <- struct{}{}:
			acquired = true
		case <-ctx.Done():
		}
	}
	if acquired {
		v, err, panicked := e.invoke(ctx, f, env, args)
		<-sem
		switch {
		case panicked:
			out.err = cell.WrongArgument.Errorf("internal error; please report it (the server log names the place)").In(f.Name)
		case err != nil && ctx.Err() != nil:
			// A call that failed after its context ended is answered as
			// cancelled or late, whatever the failure said: it is never
			// kept as an answer.
			out.err = ctxError(ctx, f, timeout)
		case err != nil:
			out.err = cell.AsError(err).In(f.Name)
		default:
			var enc []byte
			enc, out.err = cell.EncodeResult(make([]byte, 0, 64), f.Name, v)
			if out.err == nil {
				out.val = enc
			}
		}
		env.mu.Lock()
		out.deps, out.reads = env.deps, env.reads
		env.mu.Unlock()
		cacheable := !panicked && (out.err == nil || out.err.Code != cell.CodeBusy)
		if cacheable {
			e.results.Put(key, out, int64(len(key)+len(out.val)+200+64*len(out.deps)))
		}
	} else if errors.Is(ctx.Err(), context.DeadlineExceeded) {
		out.err = cell.Busy.Errorf("all %d computation slots for %s calls stayed busy for the whole %s time limit; recalculate later", cap(sem), lane, timeout).In(f.Name)
	} else {
		out.err = cell.Busy.Errorf("the call was cancelled").In(f.Name)
	}
	e.mu.Lock()
	fl.out = out
	if e.flights[key] == fl {
		delete(e.flights, key)
	}
	if fl.done != nil {
		close(fl.done)
	}
	e.mu.Unlock()

	el := time.Since(start)
	lvl := slog.LevelDebug
	if el > time.Second || f.Slow {
		lvl = slog.LevelInfo
	}
	if e.log.Enabled(context.Background(), lvl) {
		var code cell.Code
		if out.err != nil {
			code = out.err.Code
		}
		e.log.Log(context.Background(), lvl, "call", "fn", f.Name, "lane", lane, "ms", float64(el.Microseconds())/1000, "result_bytes", len(out.val), "code", code)
	}
}

// ctxError explains why a computation's context ended.
func ctxError(ctx context.Context, f *cell.Func, timeout time.Duration) *cell.Error {
	if errors.Is(ctx.Err(), context.DeadlineExceeded) {
		return cell.Busy.Errorf("the computation took longer than its time limit of %s", timeout).In(f.Name)
	}
	return cell.Busy.Errorf("the call was cancelled").In(f.Name)
}

// invoke runs f.Call, turning a panic into an error (logged with the code
// location only, never values).
func (e *engine) invoke(ctx context.Context, f *cell.Func, env cell.Env, args cell.Args) (v any, err error, panicked bool) {
	defer func() {
		if r := recover(); r != nil {
			panicked = true
			e.log.Error("cell function panicked", "fn", f.Name, "panic_type", fmt.Sprintf("%T", r), "at", panicFrames())
		}
	}()
	v, err = f.Call(ctx, env, args)
	return v, err, false
}

// panicFrames lists the code locations of a panic (no argument values).
func panicFrames() string {
	pcs := make([]uintptr, 16)
	n := runtime.Callers(4, pcs)
	frames := runtime.CallersFrames(pcs[:n])
	var b strings.Builder
	for {
		fr, more := frames.Next()
		if !strings.HasPrefix(fr.Function, "runtime.") {
			if b.Len() > 0 {
				b.WriteString(" < ")
			}
			fmt.Fprintf(&b, "%s:%d", fr.Function, fr.Line)
		}
		if !more || b.Len() > 600 {
			break
		}
	}
	return b.String()
}

// callEnv is the Env of one computation.
type callEnv struct {
	e   *engine
	f   *cell.Func
	ctx context.Context
	fl  *flight

	mu    sync.Mutex
	deps  []dep
	reads []string
}

func (c *callEnv) addDep(ref, h string, bare bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	for _, d := range c.deps {
		if d.ref == ref && d.handle == h {
			return
		}
	}
	c.deps = append(c.deps, dep{ref: ref, handle: h})
	if bare {
		for _, r := range c.reads {
			if r == ref {
				return
			}
		}
		c.reads = append(c.reads, ref)
	}
}

// Model implements cell.Env.
func (c *callEnv) Model(ref string) (cell.ModelRef, error) {
	ref = strings.TrimSpace(ref)
	name, n, ok := cell.SplitHandle(ref)
	m, err := c.e.reg.Get(ref)
	if ok && CheckModelName(name) == nil {
		h := ""
		if err == nil {
			h = m.Handle
		}
		c.addDep(strings.ToLower(ref), h, n == 0)
	}
	return m, err
}

// listDep is the dependency of a result that read the list of models: it
// stays valid while no model is added, refitted or deleted.
const listDep = "*list"

// listKey is a text that changes whenever the registry's listing does.
func listKey(list []ModelInfo) string {
	var b strings.Builder
	for _, m := range list {
		b.WriteString(m.Latest)
		b.WriteByte(' ')
	}
	return b.String()
}

// Names lists the models' names, sorted; the result of a call that uses it
// is recomputed after any model is added, refitted or deleted.
func (c *callEnv) Names() []string {
	list := c.e.reg.List()
	names := make([]string, len(list))
	for i, m := range list {
		names[i] = m.Name
	}
	c.addDep(listDep, listKey(list), false)
	return names
}

// SaveModel implements cell.Env.
func (c *callEnv) SaveModel(name string, doc []byte) (string, error) {
	if !c.f.Writes {
		return "", cell.WrongArgument.Errorf("internal error: the function saves a model but is not declared as writing")
	}
	if err := c.ctx.Err(); err != nil {
		return "", err
	}
	h, _, err := c.e.reg.Save(name, doc)
	if err != nil {
		return "", err
	}
	// The result (the handle) stays valid while this version is the latest.
	c.addDep(strings.ToLower(name), h, false)
	return h, nil
}

// Progress implements cell.Env.
func (c *callEnv) Progress(done float64) { c.fl.progress(done) }

// onceFlight is one Env.Once computation shared by concurrent callers.
type onceFlight struct {
	done chan struct{}
	val  any
	err  error
	// stopped: the computation failed after its caller's context ended,
	// so its error says nothing about the inputs; a waiter whose own call
	// goes on computes afresh.
	stopped bool
}

// Once implements cell.Env.
func (c *callEnv) Once(key string, fn func() (any, error)) (any, error) {
	e := c.e
	for {
		if v, ok := e.onceVal.Get(key); ok {
			return v, nil
		}
		e.mu.Lock()
		if of := e.onceFlights[key]; of != nil {
			e.mu.Unlock()
			select {
			case <-of.done:
			case <-c.ctx.Done():
				return nil, c.ctx.Err()
			}
			if of.err == nil {
				return of.val, nil
			}
			if (of.stopped || isCtxErr(of.err)) && c.ctx.Err() == nil {
				continue // the first caller gave up; try ourselves
			}
			return nil, of.err
		}
		of := &onceFlight{done: make(chan struct{})}
		e.onceFlights[key] = of
		e.mu.Unlock()
		func() {
			defer func() {
				if r := recover(); r != nil {
					of.err = cell.WrongArgument.Errorf("internal error; please report it")
					e.mu.Lock()
					delete(e.onceFlights, key)
					e.mu.Unlock()
					close(of.done)
					panic(r)
				}
			}()
			of.val, of.err = fn()
			of.stopped = of.err != nil && c.ctx.Err() != nil
		}()
		if of.err == nil {
			e.onceVal.Put(key, of.val, 1)
		}
		e.mu.Lock()
		delete(e.onceFlights, key)
		e.mu.Unlock()
		close(of.done)
		return of.val, of.err
	}
}

func isCtxErr(err error) bool {
	if errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded) {
		return true
	}
	var ce *cell.Error
	return errors.As(err, &ce) && ce.Code == cell.CodeBusy
}

// cacheKey is the canonical form of (function, arguments): exact cell kinds
// and values, so 1 and "1" differ. Long keys are replaced by their SHA-256.
func cacheKey(f *cell.Func, args cell.Args) string {
	b := make([]byte, 0, 128)
	b = append(b, f.Name...)
	for _, v := range args.Values() {
		b = append(b, 0)
		switch {
		case v.IsAbsent():
			b = append(b, 'a')
			continue
		case v.IsScalar():
			b = append(b, 's')
		default:
			b = append(b, 'r')
			r, c := v.Dims()
			b = binary.AppendUvarint(b, uint64(r))
			b = binary.AppendUvarint(b, uint64(c))
		}
		for _, c := range v.Flat() {
			b = append(b, byte(c.Kind))
			switch c.Kind {
			case cell.KindNumber:
				b = binary.LittleEndian.AppendUint64(b, math.Float64bits(c.Num))
			case cell.KindBool:
				if c.B {
					b = append(b, 1)
				} else {
					b = append(b, 0)
				}
			case cell.KindText, cell.KindError:
				b = binary.AppendUvarint(b, uint64(len(c.Str)))
				b = append(b, c.Str...)
			}
		}
	}
	if len(b) <= 96 {
		return string(b)
	}
	sum := sha256.Sum256(b)
	return "#" + string(sum[:])
}

func quoteName(s string) string {
	if len(s) > 64 {
		s = s[:64] + "…"
	}
	return strconv.Quote(s)
}

package rules

import (
	"math"
	"strings"
	"sync"
	"sync/atomic"

	"github.com/google/cel-go/cel"

	"veer/internal/lru"
)

// DefaultCacheSize is the number of compiled rules a Cache keeps when
// NewCache is given a size of 0 or less.
const DefaultCacheSize = 256

// Cache compiles each rule text once and keeps the most recently used
// compiled rules (least recently used ones are dropped beyond its size).
// Failed compilations are kept too, so a rule with a typo is not compiled
// again on every recalculation. A Cache is safe for concurrent use; two
// callers asking for the same new text wait for one compilation.
type Cache struct {
	lim Limits

	mu           sync.Mutex
	env          *cel.Env // exam environment, built on first use
	entries      *lru.Cache[cacheKey, *cacheEntry]
	compilations atomic.Int64
}

type cacheKey struct {
	expr string
	want ResultKind
	cols string // "" for exam rules; the column declarations otherwise
}

type cacheEntry struct {
	ready chan struct{} // closed once rule/crule/err are set
	rule  *Rule
	crule *ColumnRule
	jrule *JointRule
	err   error
}

// NewCache returns an empty cache holding up to size compiled rules, whose
// rules obey lim (zero fields take the defaults).
func NewCache(size int, lim Limits) *Cache {
	if size <= 0 {
		size = DefaultCacheSize
	}
	return &Cache{lim: lim.withDefaults(), entries: lru.New[cacheKey, *cacheEntry](size, math.MaxInt64)}
}

// Limits returns the limits the cache compiles rules with.
func (c *Cache) Limits() Limits { return c.lim }

// Compilations returns how many times the cache has compiled a rule (hits
// do not count).
func (c *Cache) Compilations() int64 { return c.compilations.Load() }

// Len returns the number of rules held.
func (c *Cache) Len() int { return c.entries.Len() }

// Compile is the cached form of the package function Compile.
func (c *Cache) Compile(expr string, want ResultKind) (*Rule, error) {
	e := c.lookup(cacheKey{expr: expr, want: want}, func(e *cacheEntry) {
		env, err := c.examEnv()
		if err != nil {
			e.err = err
			return
		}
		e.rule, e.err = compileExam(env, expr, want, c.lim)
	})
	return e.rule, e.err
}

// CompileColumns is the cached form of the package function CompileColumns.
func (c *Cache) CompileColumns(expr string, names []string, want ResultKind) (*ColumnRule, error) {
	cols := make([]Column, len(names))
	for i, n := range names {
		cols[i] = Column{Name: n, Kind: Any}
	}
	return c.CompileColumnsTyped(expr, cols, want)
}

// CompileColumnsTyped is the cached form of CompileColumnsTyped.
func (c *Cache) CompileColumnsTyped(expr string, cols []Column, want ResultKind) (*ColumnRule, error) {
	var sb strings.Builder
	sb.WriteString("cols")
	for _, col := range cols {
		sb.WriteByte(0)
		sb.WriteString(col.Name)
		sb.WriteByte(0)
		sb.WriteByte(byte('0' + col.Kind))
	}
	e := c.lookup(cacheKey{expr: expr, want: want, cols: sb.String()}, func(e *cacheEntry) {
		e.crule, e.err = compileColumns(expr, cols, want, c.lim)
	})
	return e.crule, e.err
}

func (c *Cache) examEnv() (*cel.Env, error) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.env == nil {
		env, err := newExamEnv(c.lim)
		if err != nil {
			return nil, err
		}
		c.env = env
	}
	return c.env, nil
}

// lookup returns the entry for key, running build once if it is new.
func (c *Cache) lookup(key cacheKey, build func(*cacheEntry)) *cacheEntry {
	e, found := c.entries.GetOrAdd(key, func() (*cacheEntry, int64) {
		return &cacheEntry{ready: make(chan struct{})}, 1
	})
	if found {
		<-e.ready
		return e
	}
	c.compilations.Add(1)
	defer close(e.ready)
	build(e)
	return e
}

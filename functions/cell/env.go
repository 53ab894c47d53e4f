package cell

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"sort"
	"strings"
	"sync"
	"time"
)

// ModelRef is one stored version of a model as the registry returns it.
type ModelRef struct {
	Name    string    // display name, e.g. "bp"
	Version int       // 1, 2, ...
	Handle  string    // exact version, e.g. "bp@v3"
	Doc     []byte    // the stored document; do not modify
	SHA256  string    // hex checksum of Doc
	Saved   time.Time // when this version was saved (zero for built-in models)
	Builtin bool      // a read-only model shipped with the program
}

// Env is what a cell function may use besides its arguments. The server
// provides one per call.
type Env interface {
	// Model returns a model by bare name (latest version) or by handle
	// ("name@v3", an exact version). An unknown model is a #REF! error. The
	// server records bare names read so that a streaming call is answered
	// again when that model gets a new version.
	Model(nameOrHandle string) (ModelRef, error)
	// SaveModel stores doc as the latest version of the named model and
	// returns its handle. Saving bytes identical to the latest version
	// returns the existing handle, so doc must be deterministic (same data,
	// same bytes). Only functions declared Writes may save.
	SaveModel(name string, doc []byte) (handle string, err error)
	// Progress reports the fraction done, in [0, 1], of a slow computation.
	Progress(done float64)
	// Once runs fn once per key while its result is kept in a bounded cache
	// shared by all calls; concurrent callers with the same key wait for one
	// run. Errors are not kept. Keys are global: start them with a prefix of
	// your package, and include every input (e.g. a model handle).
	Once(key string, fn func() (any, error)) (any, error)
}

// SplitHandle splits "name@v3" into ("name", 3). A bare name gives version 0.
// ok is false when the text after '@' is not v followed by a positive number.
func SplitHandle(s string) (name string, version int, ok bool) {
	name, ver, found := strings.Cut(s, "@")
	if !found {
		return name, 0, true
	}
	if len(ver) < 2 || (ver[0] != 'v' && ver[0] != 'V') {
		return name, 0, false
	}
	n := 0
	for _, c := range ver[1:] {
		if c < '0' || c > '9' || n > 1e8 {
			return name, 0, false
		}
		n = n*10 + int(c-'0')
	}
	if n == 0 {
		return name, 0, false
	}
	return name, n, true
}

// MemoryEnv is an Env keeping models in memory, for tests and for running
// catalogue functions outside the server. The zero value is ready to use.
type MemoryEnv struct {
	mu     sync.Mutex
	models map[string][]ModelRef // lower-case name -> versions
	once   map[string]any
	// Read lists the bare model names read, in order.
	Read []string
	// Progressed records the progress reports.
	Progressed []float64
}

// Model implements Env.
func (m *MemoryEnv) Model(ref string) (ModelRef, error) {
	name, ver, ok := SplitHandle(ref)
	if !ok {
		return ModelRef{}, UnknownModel.Errorf("%s is not a model name or handle like name@v3", quoteShort(ref))
	}
	m.mu.Lock()
	defer m.mu.Unlock()
	if ver == 0 {
		m.Read = append(m.Read, strings.ToLower(name))
	}
	vs := m.models[strings.ToLower(name)]
	if len(vs) == 0 {
		return ModelRef{}, UnknownModel.Errorf("there is no model named %s", quoteShort(name))
	}
	if ver == 0 {
		return vs[len(vs)-1], nil
	}
	if ver > len(vs) {
		return ModelRef{}, UnknownModel.Errorf("model %s has no version %d", quoteShort(name), ver)
	}
	return vs[ver-1], nil
}

// SaveModel implements Env.
func (m *MemoryEnv) SaveModel(name string, doc []byte) (string, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	if m.models == nil {
		m.models = map[string][]ModelRef{}
	}
	key := strings.ToLower(name)
	vs := m.models[key]
	sum := sha256.Sum256(doc)
	hexsum := hex.EncodeToString(sum[:])
	if len(vs) > 0 && vs[len(vs)-1].SHA256 == hexsum {
		return vs[len(vs)-1].Handle, nil
	}
	disp := name
	if len(vs) > 0 {
		disp = vs[0].Name
	}
	r := ModelRef{Name: disp, Version: len(vs) + 1, Doc: append([]byte(nil), doc...), SHA256: hexsum}
	r.Handle = fmt.Sprintf("%s@v%d", disp, r.Version)
	m.models[key] = append(vs, r)
	return r.Handle, nil
}

// Progress implements Env.
func (m *MemoryEnv) Progress(done float64) {
	m.mu.Lock()
	m.Progressed = append(m.Progressed, done)
	m.mu.Unlock()
}

// Once implements Env (without bounds; it is for tests).
func (m *MemoryEnv) Once(key string, fn func() (any, error)) (any, error) {
	m.mu.Lock()
	if v, ok := m.once[key]; ok {
		m.mu.Unlock()
		return v, nil
	}
	m.mu.Unlock()
	v, err := fn()
	if err != nil {
		return nil, err
	}
	m.mu.Lock()
	if m.once == nil {
		m.once = map[string]any{}
	}
	m.once[key] = v
	m.mu.Unlock()
	return v, nil
}

// Names returns the names of the models held, sorted.
func (m *MemoryEnv) Names() []string {
	m.mu.Lock()
	defer m.mu.Unlock()
	var out []string
	for _, vs := range m.models {
		out = append(out, vs[0].Name)
	}
	sort.Strings(out)
	return out
}

package server

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"sync"
	"time"

	"veer/functions/cell"
	"veer/internal/atomicfile"
	"veer/internal/lru"
)

// Registry keeps fitted models on disk, versioned and checksummed.
//
// Layout under its directory (one server per directory):
//
//	<key>@v<N>.model   one version: a JSON header line, then the document
//	<key>.deleted      tombstone: all versions up to N are deleted
//	.<file>.tmp-*      temporary files of a save in progress (atomicfile)
//	.lock              held by the process using the directory
//
// <key> is the model name in lower case (names are case-insensitive; the
// spelling of the first save is kept for display). Each file is written
// atomically by package atomicfile (temporary file in the same directory,
// fsync, link or rename, fsync of the directory), so a process killed at any moment leaves only
// complete files, and a save that returned is on disk. The header carries the
// SHA-256 and size of the document; a file that fails the check is skipped
// with a logged warning.
//
// Saving bytes identical to the latest version returns the existing handle;
// different bytes add version N+1. Handles are "name@vN"; a bare name means
// the latest version. Version numbers are never reused, even after a delete.
type Registry struct {
	dir string
	log *slog.Logger

	saveMu sync.Mutex // serialises saves and deletes (disk writes)

	mu       sync.RWMutex
	models   map[string]*model
	watchers map[int]func(name string)
	nextW    int

	// oldDocs keeps recently read documents of versions other than the
	// latest (which stays in memory), verified, by file path.
	oldDocs *lru.Cache[string, []byte]

	// unlock releases the lock on the directory (nil when another process
	// held it at open, or after Close).
	unlock func()
}

type model struct {
	name     string // display name
	builtin  bool
	versions []*version // ascending by n
	deleted  int        // tombstone: versions <= deleted are gone
	// damaged holds the numbers of versions whose files failed their check
	// when the registry was opened, with what was wrong. They keep their
	// numbers (never reused) and are reported, never skipped silently.
	damaged map[int]string
}

type version struct {
	n     int
	sha   string
	size  int
	saved time.Time
	path  string // "" for built-in models
	doc   []byte // nil until read
}

func (m *model) latest() *version {
	if len(m.versions) == 0 {
		return nil
	}
	return m.versions[len(m.versions)-1]
}

func (m *model) find(n int) *version {
	i := sort.Search(len(m.versions), func(i int) bool { return m.versions[i].n >= n })
	if i < len(m.versions) && m.versions[i].n == n {
		return m.versions[i]
	}
	return nil
}

func (m *model) next() int {
	n := max(m.deleted, m.newestDamaged())
	if v := m.latest(); v != nil && v.n > n {
		n = v.n
	}
	return n + 1
}

// newestDamaged returns the highest damaged version number, or 0.
func (m *model) newestDamaged() int {
	n := 0
	for v := range m.damaged {
		n = max(n, v)
	}
	return n
}

// latestIsDamaged reports whether the newest version of m is damaged: a
// bare name must then not quietly mean an older one.
func (m *model) latestIsDamaged() bool {
	d := m.newestDamaged()
	if d == 0 {
		return false
	}
	v := m.latest()
	return v == nil || v.n < d
}

// handle returns "name@vN".
func handle(name string, n int) string { return name + "@v" + strconv.Itoa(n) }

// header is the first line of a model file.
type header struct {
	Format  string    `json:"format"`
	Name    string    `json:"name"`
	Version int       `json:"version"`
	Size    int       `json:"size"`
	SHA256  string    `json:"sha256"`
	Saved   time.Time `json:"saved"`
}

type tombstone struct {
	Format string `json:"format"`
	Name   string `json:"name"`
	UpTo   int    `json:"upTo"`
}

const (
	modelFormat     = "veer-model/1"
	tombstoneFormat = "veer-tombstone/1"
	modelExt        = ".model"
	// lockFile is held (flock) by the process using the directory.
	lockFile     = ".lock"
	tombstoneExt = ".deleted"
	// MaxModelBytes bounds one stored model document.
	MaxModelBytes = 64 << 20
)

var modelNameRE = regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$`)

// CheckModelName reports whether name can name a model: 1 to 64 letters,
// digits, '.', '_' or '-', starting with a letter or digit.
func CheckModelName(name string) error {
	if !modelNameRE.MatchString(name) {
		return cell.WrongArgument.Errorf("%s cannot name a model: use 1 to 64 letters, digits, '.', '_' or '-', starting with a letter or digit", quoteName(name))
	}
	return nil
}

// OpenRegistry opens (creating it if needed, mode 0700) the registry in dir
// and loads every valid model file. A damaged version file is kept out of
// use but remembered (see Get and List), with a warning that names no
// model. Temporary files of saves a crash interrupted are removed at once
// when this process is the only one using dir (it holds the directory's
// lock until Close); otherwise only those older than an hour are, since
// another live process may be writing the younger ones.
func OpenRegistry(dir string, log *slog.Logger) (*Registry, error) {
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	if err := os.MkdirAll(dir, 0o700); err != nil {
		return nil, fmt.Errorf("creating model directory: %w", err)
	}
	r := &Registry{dir: dir, log: log, models: map[string]*model{}, watchers: map[int]func(string){}, oldDocs: lru.New[string, []byte](64, 128<<20)}
	r.unlock = lockDir(filepath.Join(dir, lockFile))
	entries, err := os.ReadDir(dir)
	if err != nil {
		r.Close()
		return nil, fmt.Errorf("reading model directory: %w", err)
	}
	removed := 0
	for _, e := range entries {
		name := e.Name()
		switch {
		case atomicfile.IsTemp(name):
			// A temporary file is never a saved version: a save that
			// completed linked it to its version's name first.
			info, err := e.Info()
			if err == nil && (r.unlock != nil || time.Since(info.ModTime()) > time.Hour) {
				if os.Remove(filepath.Join(dir, name)) == nil {
					removed++
				}
			}
		case strings.HasSuffix(name, tombstoneExt):
			r.loadTombstone(name)
		}
	}
	if removed > 0 {
		r.log.Info("removed temporary files left by an interrupted save", "files", removed)
	}
	for _, e := range entries {
		if strings.HasSuffix(e.Name(), modelExt) && !e.IsDir() {
			r.loadVersion(e.Name())
		}
	}
	for key, m := range r.models {
		kept := m.versions[:0]
		for _, v := range m.versions {
			if v.n <= m.deleted {
				os.Remove(v.path) // finish a delete interrupted by a crash
				continue
			}
			kept = append(kept, v)
		}
		m.versions = kept
		for n := range m.damaged {
			if n <= m.deleted {
				os.Remove(filepath.Join(dir, key+"@v"+strconv.Itoa(n)+modelExt))
				delete(m.damaged, n)
			}
		}
		sort.Slice(m.versions, func(i, j int) bool { return m.versions[i].n < m.versions[j].n })
		if len(m.versions) > 0 {
			r.log.Debug("model loaded", "versions", len(m.versions), "key_len", len(key))
		}
	}
	return r, nil
}

// Close releases the directory's lock. The registry must not be used
// afterwards.
func (r *Registry) Close() error {
	r.mu.Lock()
	unlock := r.unlock
	r.unlock = nil
	r.mu.Unlock()
	if unlock != nil {
		unlock()
	}
	return nil
}

func (r *Registry) loadTombstone(file string) {
	b, err := os.ReadFile(filepath.Join(r.dir, file))
	var t tombstone
	if err == nil {
		err = json.Unmarshal(b, &t)
	}
	key := strings.TrimSuffix(file, tombstoneExt)
	if err != nil || t.Format != tombstoneFormat || strings.ToLower(t.Name) != key || t.UpTo < 1 {
		r.log.Warn("skipping damaged tombstone file")
		return
	}
	m := r.models[key]
	if m == nil {
		m = &model{name: t.Name}
		r.models[key] = m
	}
	m.deleted = t.UpTo
}

func (r *Registry) loadVersion(file string) {
	path := filepath.Join(r.dir, file)
	key, n, named := parseFileName(file)
	h, doc, err := readModelFile(path)
	if err == nil && (!named || strings.ToLower(h.Name) != key || h.Version != n) {
		err = errors.New("the file name does not match its header")
	}
	if err != nil {
		// The log names no model (names can identify people or sites).
		r.log.Warn("skipping damaged model file", "version", n, "err", err.Error())
		if named {
			m := r.models[key]
			if m == nil {
				m = &model{name: key}
				r.models[key] = m
			}
			if m.damaged == nil {
				m.damaged = map[int]string{}
			}
			m.damaged[n] = err.Error()
		}
		return
	}
	m := r.models[key]
	if m == nil {
		m = &model{name: h.Name}
		r.models[key] = m
	}
	v := &version{n: h.Version, sha: h.SHA256, size: h.Size, saved: h.Saved, path: path}
	// Keep only the first version's spelling for display.
	if len(m.versions) == 0 || h.Version < m.versions[0].n {
		m.name = h.Name
	}
	v.doc = doc
	m.versions = append(m.versions, v)
	// Documents of older versions are dropped after loading (read again on
	// demand); the latest stays in memory.
	if len(m.versions) > 1 {
		sort.Slice(m.versions, func(i, j int) bool { return m.versions[i].n < m.versions[j].n })
		for _, o := range m.versions[:len(m.versions)-1] {
			o.doc = nil
		}
	}
}

// parseFileName splits "key@vN.model".
func parseFileName(file string) (string, int, bool) {
	base := strings.TrimSuffix(file, modelExt)
	key, n, ok := cell.SplitHandle(base)
	if !ok || n == 0 {
		return "", 0, false
	}
	return key, n, true
}

// readModelFile reads and verifies one model file.
func readModelFile(path string) (header, []byte, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return header{}, nil, err
	}
	line, doc, ok := bytes.Cut(b, []byte{'\n'})
	if !ok {
		return header{}, nil, errors.New("no header line (file cut short?)")
	}
	var h header
	if err := json.Unmarshal(line, &h); err != nil {
		return header{}, nil, fmt.Errorf("bad header: %w", err)
	}
	if h.Format != modelFormat {
		return header{}, nil, fmt.Errorf("unknown format %q", h.Format)
	}
	if len(doc) != h.Size {
		return header{}, nil, fmt.Errorf("document has %d bytes, header says %d (file cut short?)", len(doc), h.Size)
	}
	sum := sha256.Sum256(doc)
	if hex.EncodeToString(sum[:]) != h.SHA256 {
		return header{}, nil, errors.New("checksum mismatch (file damaged)")
	}
	return h, doc, nil
}

// Watch calls fn with the lower-case model name after every save of a new
// version and every delete. fn runs on the saving goroutine and must not
// block. The returned function stops the calls.
func (r *Registry) Watch(fn func(name string)) (stop func()) {
	r.mu.Lock()
	id := r.nextW
	r.nextW++
	r.watchers[id] = fn
	r.mu.Unlock()
	return func() {
		r.mu.Lock()
		delete(r.watchers, id)
		r.mu.Unlock()
	}
}

func (r *Registry) notify(key string) {
	r.mu.RLock()
	fns := make([]func(string), 0, len(r.watchers))
	for _, fn := range r.watchers {
		fns = append(fns, fn)
	}
	r.mu.RUnlock()
	for _, fn := range fns {
		fn(key)
	}
}

// Save stores doc as the latest version of the named model and returns its
// handle and whether a new version was added. Bytes identical to the latest
// version return the latest handle unchanged. Built-in models are read-only.
func (r *Registry) Save(name string, doc []byte) (string, bool, error) {
	if err := CheckModelName(name); err != nil {
		return "", false, err
	}
	if len(doc) > MaxModelBytes {
		return "", false, cell.WrongArgument.Errorf("the model document has %d bytes; the limit is %d", len(doc), MaxModelBytes)
	}
	key := strings.ToLower(name)
	sum := sha256.Sum256(doc)
	sha := hex.EncodeToString(sum[:])

	r.saveMu.Lock()
	defer r.saveMu.Unlock()

	r.mu.RLock()
	m := r.models[key]
	var next int
	disp := name
	if m != nil {
		if m.builtin {
			r.mu.RUnlock()
			return "", false, cell.UnknownModel.Errorf("model %q is built in and read-only; save under another name", m.name)
		}
		if v := m.latest(); v != nil {
			if v.sha == sha && !m.latestIsDamaged() {
				h := handle(m.name, v.n)
				r.mu.RUnlock()
				return h, false, nil
			}
			disp = m.name
		}
		next = m.next()
	} else {
		next = 1
	}
	r.mu.RUnlock()

	saved := time.Now().UTC().Truncate(time.Millisecond)
	var path string
	for {
		h := header{Format: modelFormat, Name: disp, Version: next, Size: len(doc), SHA256: sha, Saved: saved}
		line, err := json.Marshal(h)
		if err != nil {
			return "", false, err
		}
		buf := make([]byte, 0, len(line)+1+len(doc))
		buf = append(append(append(buf, line...), '\n'), doc...)
		file := key + "@v" + strconv.Itoa(next) + modelExt
		err = atomicfile.Create(filepath.Join(r.dir, file), buf, 0o600)
		if errors.Is(err, fs.ErrExist) {
			next++ // another writer took this number; never overwrite
			continue
		}
		if err != nil {
			r.log.Error("saving model failed", "err", err.Error())
			return "", false, cell.WrongArgument.Errorf("could not save the model: %v", err)
		}
		path = filepath.Join(r.dir, file)
		break
	}

	r.mu.Lock()
	m = r.models[key]
	if m == nil {
		m = &model{name: disp}
		r.models[key] = m
	}
	if len(m.versions) == 0 {
		m.name = disp
	}
	if old := m.latest(); old != nil && old.path != "" {
		old.doc = nil
	}
	m.versions = append(m.versions, &version{n: next, sha: sha, size: len(doc), saved: saved, path: path, doc: append([]byte(nil), doc...)})
	h := handle(m.name, next)
	r.mu.Unlock()
	r.log.Info("model saved", "bytes", len(doc), "version", next)
	r.notify(key)
	return h, true, nil
}

// Get returns a model by bare name (latest version) or handle ("name@v3").
// Unknown names and versions are #REF! errors. A damaged version is a #REF!
// error that says so, by handle and, when it is the newest version, by
// bare name too: a bare name never quietly means an older version.
func (r *Registry) Get(ref string) (cell.ModelRef, error) {
	name, n, ok := cell.SplitHandle(strings.TrimSpace(ref))
	if !ok || CheckModelName(name) != nil {
		return cell.ModelRef{}, cell.UnknownModel.Errorf("%s is not a model name or handle (like bp or bp@v3)", quoteName(ref))
	}
	key := strings.ToLower(name)
	r.mu.RLock()
	m := r.models[key]
	var v *version
	if m != nil {
		if why, bad := m.damaged[n]; bad && n > 0 {
			r.mu.RUnlock()
			return cell.ModelRef{}, cell.UnknownModel.Errorf("version %d of model %s is damaged on disk (%s)%s", n, quoteName(m.name), why, m.intactHint())
		}
		if n == 0 && m.latestIsDamaged() {
			d := m.newestDamaged()
			why := m.damaged[d]
			r.mu.RUnlock()
			return cell.ModelRef{}, cell.UnknownModel.Errorf("the newest version of model %s, %s, is damaged on disk (%s)%s", quoteName(m.name), handle(m.name, d), why, m.intactHint())
		}
		if n == 0 {
			v = m.latest()
		} else {
			v = m.find(n)
		}
	}
	if v == nil {
		defer r.mu.RUnlock()
		if m != nil && len(m.versions) > 0 {
			return cell.ModelRef{}, cell.UnknownModel.Errorf("model %s has no version %d (latest is %d)", quoteName(m.name), n, m.latest().n)
		}
		return cell.ModelRef{}, cell.UnknownModel.Errorf("there is no model named %s; fit one or check the name", quoteName(name))
	}
	ref2 := cell.ModelRef{Name: m.name, Version: v.n, Handle: handle(m.name, v.n), Doc: v.doc, SHA256: v.sha, Saved: v.saved, Builtin: m.builtin}
	path := v.path
	r.mu.RUnlock()
	if ref2.Doc == nil {
		if doc, ok := r.oldDocs.Get(path); ok {
			ref2.Doc = doc
			return ref2, nil
		}
		h, doc, err := readModelFile(path)
		if err != nil || h.SHA256 != ref2.SHA256 {
			if err == nil {
				err = errors.New("checksum changed")
			}
			r.log.Warn("stored model version unreadable", "err", err.Error())
			return cell.ModelRef{}, cell.UnknownModel.Errorf("model %s cannot be read from disk (damaged file); refit it", ref2.Handle)
		}
		r.oldDocs.Put(path, doc, int64(len(doc)))
		ref2.Doc = doc
	}
	return ref2, nil
}

// intactHint says what to do about a damaged version: name the newest
// intact one, or fit again. Call with r.mu held.
func (m *model) intactHint() string {
	if v := m.latest(); v != nil {
		return fmt.Sprintf("; %s is the newest intact version: name it to use it, or fit the model again", handle(m.name, v.n))
	}
	return "; fit the model again"
}

// Resolve returns the handle a name or handle currently stands for, without
// reading the document; ok is false when it does not exist.
func (r *Registry) Resolve(ref string) (string, bool) {
	name, n, ok := cell.SplitHandle(ref)
	if !ok {
		return "", false
	}
	r.mu.RLock()
	defer r.mu.RUnlock()
	m := r.models[strings.ToLower(name)]
	if m == nil || (n == 0 && m.latestIsDamaged()) {
		return "", false
	}
	if _, bad := m.damaged[n]; bad && n > 0 {
		return "", false
	}
	var v *version
	if n == 0 {
		v = m.latest()
	} else {
		v = m.find(n)
	}
	if v == nil {
		return "", false
	}
	return handle(m.name, v.n), true
}

// Delete removes all versions of a model. It first writes a tombstone (so
// the delete is complete even if the process dies half way), then removes
// the files. Version numbers of a deleted name are not reused.
func (r *Registry) Delete(name string) error {
	if _, n, ok := cell.SplitHandle(name); !ok || n != 0 {
		return cell.WrongArgument.Errorf("delete takes a model name, not a handle like %s: all versions are deleted", quoteName(name))
	}
	if err := CheckModelName(name); err != nil {
		return err
	}
	key := strings.ToLower(name)
	r.saveMu.Lock()
	defer r.saveMu.Unlock()
	r.mu.RLock()
	m := r.models[key]
	if m == nil || (len(m.versions) == 0 && len(m.damaged) == 0) {
		r.mu.RUnlock()
		return cell.UnknownModel.Errorf("there is no model named %q", name)
	}
	if m.builtin {
		r.mu.RUnlock()
		return cell.UnknownModel.Errorf("model %q is built in and cannot be deleted", m.name)
	}
	upTo := m.newestDamaged()
	if v := m.latest(); v != nil {
		upTo = max(upTo, v.n)
	}
	disp := m.name
	paths := make([]string, 0, len(m.versions)+len(m.damaged))
	for _, v := range m.versions {
		paths = append(paths, v.path)
	}
	for n := range m.damaged {
		paths = append(paths, filepath.Join(r.dir, key+"@v"+strconv.Itoa(n)+modelExt))
	}
	r.mu.RUnlock()

	tb, _ := json.Marshal(tombstone{Format: tombstoneFormat, Name: disp, UpTo: upTo})
	if err := atomicfile.WriteFile(filepath.Join(r.dir, key+tombstoneExt), tb, 0o600); err != nil {
		return cell.WrongArgument.Errorf("could not delete the model: %v", err)
	}
	for _, p := range paths {
		r.oldDocs.Remove(p)
		if err := os.Remove(p); err != nil && !errors.Is(err, fs.ErrNotExist) {
			r.log.Warn("removing model file failed", "err", err.Error())
		}
	}
	atomicfile.SyncDir(r.dir)

	r.mu.Lock()
	m.versions = nil
	m.damaged = nil
	m.deleted = upTo
	r.mu.Unlock()
	r.log.Info("model deleted", "versions", len(paths))
	r.notify(key)
	return nil
}

// AddBuiltin registers a read-only model kept in memory (for example an
// embedded demo model) as version 1 and returns its handle. A stored model of
// the same name is hidden while the built-in one exists.
func (r *Registry) AddBuiltin(name string, doc []byte) (string, error) {
	if err := CheckModelName(name); err != nil {
		return "", err
	}
	key := strings.ToLower(name)
	sum := sha256.Sum256(doc)
	r.mu.Lock()
	if old := r.models[key]; old != nil {
		if old.builtin {
			r.mu.Unlock()
			return "", fmt.Errorf("built-in model %q registered twice", name)
		}
		if len(old.versions) > 0 {
			r.log.Warn("a stored model is hidden by a built-in model of the same name")
		}
	}
	r.models[key] = &model{name: name, builtin: true, versions: []*version{{
		n: 1, sha: hex.EncodeToString(sum[:]), size: len(doc), doc: append([]byte(nil), doc...),
	}}}
	r.mu.Unlock()
	r.notify(key)
	return handle(name, 1), nil
}

// VersionInfo describes one stored version.
type VersionInfo struct {
	Version int       `json:"version"`
	Handle  string    `json:"handle"`
	SHA256  string    `json:"sha256,omitempty"`
	Size    int       `json:"size"`
	Saved   time.Time `json:"saved,omitzero"`
	// Damaged says what is wrong with a version whose file failed its
	// check; such a version cannot be read.
	Damaged string `json:"damaged,omitempty"`
}

// ModelInfo describes one model and its versions (oldest first).
type ModelInfo struct {
	Name    string `json:"name"`
	Builtin bool   `json:"builtin"`
	// Latest is the handle of the newest version, which a bare name
	// means; it can be a damaged version (see Versions).
	Latest   string        `json:"latest"`
	Versions []VersionInfo `json:"versions"`
}

// List returns all models sorted by name, damaged versions included.
func (r *Registry) List() []ModelInfo {
	r.mu.RLock()
	defer r.mu.RUnlock()
	out := []ModelInfo{}
	for _, m := range r.models {
		if len(m.versions) == 0 && len(m.damaged) == 0 {
			continue
		}
		mi := ModelInfo{Name: m.name, Builtin: m.builtin}
		for _, v := range m.versions {
			mi.Versions = append(mi.Versions, VersionInfo{Version: v.n, Handle: handle(m.name, v.n), SHA256: v.sha, Size: v.size, Saved: v.saved})
		}
		for n, why := range m.damaged {
			mi.Versions = append(mi.Versions, VersionInfo{Version: n, Handle: handle(m.name, n), Damaged: why})
		}
		sort.Slice(mi.Versions, func(i, j int) bool { return mi.Versions[i].Version < mi.Versions[j].Version })
		mi.Latest = mi.Versions[len(mi.Versions)-1].Handle
		out = append(out, mi)
	}
	sort.Slice(out, func(i, j int) bool { return strings.ToLower(out[i].Name) < strings.ToLower(out[j].Name) })
	return out
}

// Dir returns the registry's directory.
func (r *Registry) Dir() string { return r.dir }

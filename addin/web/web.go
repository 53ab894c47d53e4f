package web

import (
	"bytes"
	"embed"
	"fmt"
	"io"
	"io/fs"
	"path"
	"strings"
	"sync"
	"time"

	"veer/functions/cell"
)

//go:embed index.html taskpane.html taskpane.js taskpane.css veer.js client.js unsupported.js icon-*.png
var files embed.FS

// Files returns the add-in's static files: index.html, the task pane
// (taskpane.html, taskpane.js, taskpane.css), the runtime (veer.js and
// client.js; JavaScript modules), unsupported.js (the message for webviews
// without modules) and the icons (icon-16.png, icon-32.png, icon-64.png and
// icon-80.png, the sizes the manifest names; plain image files).
func Files() fs.FS { return files }

// SiteOptions configure Site.
type SiteOptions struct {
	// BaseURL returns the server's base URL ("https://localhost:7311") for
	// the manifest served as manifest.xml. It is called when the manifest
	// is first requested, so it may depend on the port the server got. If
	// nil or it returns "", DefaultBaseURL is used.
	BaseURL func() string
	// Mount adds directories: Mount["test"] is served as test/... (the
	// browser tests use it for their stand-in host page).
	Mount map[string]fs.FS
}

// Site returns the files served at /addin/: Files plus the files generated
// from the catalogue listing — functions.json (host metadata), catalog.js
// (runtime table), help.html and manifest.xml.
func Site(l cell.Listing, opt SiteOptions) (fs.FS, error) {
	if _, err := Metadata(l, ""); err != nil {
		return nil, err
	}
	cat, err := CatalogJS(l)
	if err != nil {
		return nil, err
	}
	help, err := Help(l)
	if err != nil {
		return nil, err
	}
	base := func() string {
		b := ""
		if opt.BaseURL != nil {
			b = opt.BaseURL()
		}
		if b == "" {
			b = DefaultBaseURL
		}
		return b
	}
	gen := map[string]func() ([]byte, error){
		"catalog.js": func() ([]byte, error) { return cat, nil },
		"help.html":  func() ([]byte, error) { return help, nil },
		// The manifest and the metadata carry absolute URLs, so they are
		// made when first asked for, once the server's port is known.
		"functions.json": lazy(func() ([]byte, error) {
			b, err := CheckBaseURL(base())
			if err != nil {
				return nil, err
			}
			return Metadata(l, b+"/addin/help.html")
		}),
		"manifest.xml": lazy(func() ([]byte, error) { return Manifest(base()) }),
	}
	mounts := map[string]fs.FS{}
	for dir, f := range opt.Mount {
		if !fs.ValidPath(dir) || dir == "." || strings.Contains(dir, "/") {
			return nil, fmt.Errorf("web: mount name %q must be one path element", dir)
		}
		mounts[dir] = f
	}
	return &site{base: files, gen: gen, mounts: mounts, mod: time.Now().UTC().Truncate(time.Second)}, nil
}

// lazy makes f run once, on first use.
func lazy(f func() ([]byte, error)) func() ([]byte, error) {
	var once sync.Once
	var b []byte
	var err error
	return func() ([]byte, error) {
		once.Do(func() { b, err = f() })
		return b, err
	}
}

// site overlays generated files and mounted directories on the embedded
// files.
type site struct {
	base   fs.FS
	gen    map[string]func() ([]byte, error)
	mounts map[string]fs.FS
	mod    time.Time
}

func (s *site) Open(name string) (fs.File, error) {
	if !fs.ValidPath(name) {
		return nil, &fs.PathError{Op: "open", Path: name, Err: fs.ErrInvalid}
	}
	if g, ok := s.gen[name]; ok {
		b, err := g()
		if err != nil {
			return nil, &fs.PathError{Op: "open", Path: name, Err: err}
		}
		return &memFile{Reader: bytes.NewReader(b), name: path.Base(name), size: int64(len(b)), mod: s.mod}, nil
	}
	if dir, rest, ok := strings.Cut(name, "/"); ok {
		if m, ok := s.mounts[dir]; ok {
			return m.Open(rest)
		}
	} else if m, ok := s.mounts[name]; ok {
		return m.Open(".")
	}
	return s.base.Open(name)
}

// memFile is a generated file. It is an io.Seeker, which http.FileServerFS
// needs for ranges and content sniffing.
type memFile struct {
	*bytes.Reader
	name string
	size int64
	mod  time.Time
}

func (f *memFile) Stat() (fs.FileInfo, error) { return memInfo{f}, nil }
func (f *memFile) Close() error               { return nil }

type memInfo struct{ f *memFile }

func (i memInfo) Name() string       { return i.f.name }
func (i memInfo) Size() int64        { return i.f.size }
func (i memInfo) Mode() fs.FileMode  { return 0o444 }
func (i memInfo) ModTime() time.Time { return i.f.mod }
func (i memInfo) IsDir() bool        { return false }
func (i memInfo) Sys() any           { return nil }

var _ io.ReadSeeker = (*memFile)(nil)

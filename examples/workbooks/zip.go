package workbooks

import (
	"archive/zip"
	"bytes"
	"errors"
	"hash/crc32"
	"io"
	"io/fs"
	"sort"
)

// zipDate is the fixed MS-DOS date of every part: 1980-01-01 00:00, the
// earliest the format can hold ((year-1980)<<9 | month<<5 | day).
const zipDate = 0<<9 | 1<<5 | 1

// detZip collects the parts of a package and writes them, on Close, in a
// fixed order with fixed timestamps and no extra fields, so the same parts
// always give the same bytes. It implements excelize.ZipWriter.
type detZip struct {
	w     io.Writer
	first []string // parts written first, in this order
	store map[string]bool
	parts map[string]*bytes.Buffer
}

func newDetZip(w io.Writer, first []string, stored ...string) *detZip {
	st := map[string]bool{}
	for _, s := range stored {
		st[s] = true
	}
	return &detZip{w: w, first: first, store: st, parts: map[string]*bytes.Buffer{}}
}

func (z *detZip) Create(name string) (io.Writer, error) {
	if _, dup := z.parts[name]; dup {
		return nil, errors.New("zip: part " + name + " written twice")
	}
	b := new(bytes.Buffer)
	z.parts[name] = b
	return b, nil
}

func (z *detZip) AddFS(fs.FS) error { return errors.New("zip: AddFS is not supported") }

func (z *detZip) Close() error {
	names := make([]string, 0, len(z.parts))
	rank := map[string]int{}
	for i, f := range z.first {
		rank[f] = i + 1
	}
	for n := range z.parts {
		names = append(names, n)
	}
	sort.Slice(names, func(a, b int) bool {
		ra, rb := rank[names[a]], rank[names[b]]
		switch {
		case ra != 0 && rb != 0:
			return ra < rb
		case ra != 0 || rb != 0:
			return ra != 0
		}
		return names[a] < names[b]
	})
	zw := zip.NewWriter(z.w)
	for _, n := range names {
		data := z.parts[n].Bytes()
		if z.store[n] {
			// Stored with sizes and CRC in the local header and no data
			// descriptor, as ODF requires of the mimetype part.
			h := &zip.FileHeader{Name: n, Method: zip.Store, ModifiedDate: zipDate,
				CRC32: crc32.ChecksumIEEE(data), CompressedSize64: uint64(len(data)), UncompressedSize64: uint64(len(data))}
			w, err := zw.CreateRaw(h)
			if err != nil {
				return err
			}
			if _, err := w.Write(data); err != nil {
				return err
			}
			continue
		}
		w, err := zw.CreateHeader(&zip.FileHeader{Name: n, Method: zip.Deflate, ModifiedDate: zipDate})
		if err != nil {
			return err
		}
		if _, err := w.Write(data); err != nil {
			return err
		}
	}
	return zw.Close()
}

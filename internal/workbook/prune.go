package workbook

import (
	"archive/zip"
	"bytes"
	"encoding/xml"
	"io"
	"path"
	"regexp"
	"strings"
)

// prunePackage removes drawing and chart parts that no relationship of the
// package reaches any more, with their relationship files and content-type
// entries. Replacing the summary sheet leaves its old chart behind inside
// the workbook (the library deletes the sheet but not its drawing), so
// without this every refresh would add an unused chart to the file. Parts
// other than drawings and charts are never removed. Unchanged parts are
// copied without recompressing.
func prunePackage(data []byte) ([]byte, error) {
	zr, err := zip.NewReader(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		return nil, err
	}
	files := map[string]*zip.File{}
	for _, f := range zr.File {
		files[f.Name] = f
	}
	read := func(name string) ([]byte, bool) {
		f, ok := files[name]
		if !ok {
			return nil, false
		}
		rc, err := f.Open()
		if err != nil {
			return nil, false
		}
		defer rc.Close()
		b, err := io.ReadAll(rc)
		return b, err == nil
	}
	// Walk the relationships from the package root.
	reached := map[string]bool{}
	var walk func(source string)
	walk = func(source string) {
		dir, base := path.Split(source)
		relsName := dir + "_rels/" + base + ".rels"
		if source == "" {
			relsName = "_rels/.rels"
		}
		b, ok := read(relsName)
		if !ok {
			return
		}
		reached[relsName] = true
		var rels struct {
			Rel []struct {
				Target string `xml:"Target,attr"`
				Mode   string `xml:"TargetMode,attr"`
			} `xml:"Relationship"`
		}
		if xml.Unmarshal(b, &rels) != nil {
			return
		}
		for _, r := range rels.Rel {
			if strings.EqualFold(r.Mode, "External") || r.Target == "" {
				continue
			}
			var target string
			if strings.HasPrefix(r.Target, "/") {
				target = strings.TrimPrefix(r.Target, "/")
			} else {
				target = path.Clean(path.Join(dir, r.Target))
			}
			if reached[target] {
				continue
			}
			reached[target] = true
			walk(target)
		}
	}
	walk("")
	prunable := func(name string) bool {
		return strings.HasPrefix(name, "xl/drawings/") || strings.HasPrefix(name, "xl/charts/")
	}
	var drop []string
	for name := range files {
		if prunable(name) && !reached[name] {
			drop = append(drop, name)
		}
	}
	if len(drop) == 0 {
		return data, nil
	}
	dropped := map[string]bool{}
	for _, d := range drop {
		dropped[d] = true
	}
	ct, ok := read("[Content_Types].xml")
	if !ok {
		return data, nil
	}
	for _, d := range drop {
		re := regexp.MustCompile(`<Override PartName="/` + regexp.QuoteMeta(d) + `"[^>]*?(?:/>|></Override>)`)
		ct = re.ReplaceAll(ct, nil)
	}
	var out bytes.Buffer
	zw := zip.NewWriter(&out)
	for _, f := range zr.File {
		if dropped[f.Name] {
			continue
		}
		if f.Name == "[Content_Types].xml" {
			w, err := zw.CreateHeader(&zip.FileHeader{Name: f.Name, Method: zip.Deflate, ModifiedDate: f.ModifiedDate, ModifiedTime: f.ModifiedTime})
			if err != nil {
				return nil, err
			}
			if _, err := w.Write(ct); err != nil {
				return nil, err
			}
			continue
		}
		if err := zw.Copy(f); err != nil {
			return nil, err
		}
	}
	if err := zw.Close(); err != nil {
		return nil, err
	}
	return out.Bytes(), nil
}

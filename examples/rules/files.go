package rulesexamples

import (
	"embed"
	"io/fs"
	"sort"
)

//go:embed *.rules
var files embed.FS

// FS returns the example rule files, named like "chart.rules".
func FS() fs.FS { return files }

// Names lists the example rule files in alphabetical order.
func Names() []string {
	entries, err := fs.ReadDir(files, ".")
	if err != nil {
		panic(err) // an embedded directory always reads
	}
	var out []string
	for _, e := range entries {
		out = append(out, e.Name())
	}
	sort.Strings(out)
	return out
}

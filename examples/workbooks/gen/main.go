// Command gen writes veer's example workbooks, screening.xlsx and
// screening.ods, from the demo data. Run it from the module root:
//
//	go run ./examples/workbooks/gen            # rewrites examples/workbooks/screening.{xlsx,ods}
//	go run ./examples/workbooks/gen -out DIR   # writes them into DIR
package main

import (
	"flag"
	"fmt"
	"os"
	"path/filepath"

	"veer/examples/workbooks"
	"veer/internal/atomicfile"
)

func main() {
	out := flag.String("out", filepath.Join("examples", "workbooks"), "folder to write screening.xlsx and screening.ods into")
	flag.Parse()
	if err := run(*out); err != nil {
		fmt.Fprintln(os.Stderr, "gen:", err)
		os.Exit(1)
	}
}

func run(dir string) error {
	xlsx, ods, err := workbooks.Build()
	if err != nil {
		return err
	}
	for name, data := range map[string][]byte{workbooks.XLSXName: xlsx, workbooks.ODSName: ods} {
		p := filepath.Join(dir, name)
		if err := atomicfile.WriteFile(p, data, 0o644); err != nil {
			return err
		}
		fmt.Fprintf(os.Stderr, "wrote %s (%d bytes)\n", p, len(data))
	}
	return nil
}

// Command gen writes the small-site demo files: the synthetic SBP LMS
// table, the synthetic FEV1 equations, and the exams and truth of the
// 60-worker site. With the default seed it writes exactly the committed
// files in examples/smallsite/data.
//
//	go run ./examples/smallsite/gen [-out FOLDER] [-seed N]
package main

import (
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"

	"veer/examples/smallsite"
	"veer/internal/atomicfile"
)

func main() {
	if err := run(os.Args[1:], os.Stderr); err != nil {
		fmt.Fprintln(os.Stderr, "gen:", err)
		os.Exit(1)
	}
}

func run(args []string, talk io.Writer) error {
	fs := flag.NewFlagSet("gen", flag.ContinueOnError)
	fs.SetOutput(talk)
	out := fs.String("out", filepath.Join("examples", "smallsite", "data"), "folder to write the files into")
	seed := fs.Uint64("seed", smallsite.DefaultSeed, "seed of the generator; the default gives the committed files")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return fmt.Errorf("unexpected argument %q; use -out FOLDER and -seed N", fs.Arg(0))
	}
	files, err := smallsite.Generated(*seed)
	if err != nil {
		return err
	}
	if err := os.MkdirAll(*out, 0o755); err != nil {
		return fmt.Errorf("cannot create the output folder: %w", err)
	}
	names := make([]string, 0, len(files))
	for n := range files {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		if err := atomicfile.WriteFile(filepath.Join(*out, n), files[n], 0o644); err != nil {
			return err
		}
	}
	fmt.Fprintf(talk, "wrote %s: %v (seed %d)\n", *out, names, *seed)
	return nil
}

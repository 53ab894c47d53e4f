package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"sort"

	"veer/addin/calc"
	"veer/functions/catalog"
	"veer/functions/screening"
	"veer/internal/atomicfile"
)

// runCalcExtension builds the LibreOffice Calc extension from the function
// catalogue: veer calc-extension --out veer.oxt.
func runCalcExtension(e *env, args []string) error {
	fs := newFlags(e, "calc-extension", "[--out veer.oxt] [--unoidl-write PATH] [--sources DIR]")
	out := fs.String("out", "veer.oxt", "extension file to write")
	unoidl := fs.String("unoidl-write", "", "path of the LibreOffice SDK's unoidl-write (default: PATH, then /usr/lib/libreoffice/sdk/bin)")
	sources := fs.String("sources", "", "also write the generated sources (IDL, Python, CalcAddIns.xcu, ...) into this folder, to read them")
	version := fs.String("version", calc.DefaultVersion, "extension version")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *out == "" {
		return usagef("--out must name the .oxt file to write")
	}
	listing := catalog.New().Listing()
	opts := calc.Options{Version: *version}
	if *sources != "" {
		src, err := calc.Sources(listing, opts)
		if err != nil {
			return err
		}
		names := make([]string, 0, len(src))
		for n := range src {
			names = append(names, n)
		}
		sort.Strings(names)
		for _, n := range names {
			p := filepath.Join(*sources, filepath.FromSlash(n))
			if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
				return err
			}
			if err := atomicfile.WriteFile(p, src[n], outputPerm); err != nil {
				return err
			}
		}
		fmt.Fprintf(e.stderr, "wrote the generated sources to %s\n", *sources)
	}
	sdk, err := calc.FindSDK(*unoidl)
	if err != nil {
		return err
	}
	opts.SDK = &sdk
	oxt, err := calc.Build(context.Background(), listing, opts)
	if err != nil {
		return err
	}
	if err := atomicfile.WriteFile(*out, oxt, outputPerm); err != nil {
		return err
	}
	fns, _ := calc.Functions(listing)
	fmt.Fprintf(e.stdout, "%s\n", *out)
	fmt.Fprintf(e.stderr, "wrote %s: %d VEER functions for LibreOffice Calc (type library compiled with %s)\n", *out, len(fns), sdk.UnoidlWrite)
	fmt.Fprintf(e.stderr, "Install it with: unopkg add %s   (as root: unopkg add --shared %s), then run 'veer serve' and open Calc.\n", *out, *out)
	fmt.Fprintln(e.stderr, screening.Caution)
	return nil
}

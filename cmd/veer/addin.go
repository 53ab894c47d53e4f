package main

import (
	"fmt"

	"veer/addin/web"
	"veer/functions/catalog"
)

// runAddin prints the web add-in's generated files:
//
//	veer addin manifest [--url https://localhost:PORT]   the add-in manifest (XML)
//	veer addin metadata [--url https://localhost:PORT]    the custom-functions metadata (JSON)
//
// Both come from the function catalogue, as `veer serve` serves them at
// /addin/manifest.xml and /addin/functions.json.
func runAddin(e *env, args []string) error {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" {
		fmt.Fprintln(e.stderr, "Usage: veer addin manifest [--url https://localhost:PORT]   print the add-in manifest to sideload")
		fmt.Fprintln(e.stderr, "       veer addin metadata [--url https://localhost:PORT]   print the custom-functions metadata")
		if len(args) == 0 {
			return usagef("say which file: manifest or metadata")
		}
		return nil
	}
	switch args[0] {
	case "manifest":
		fs := newFlags(e, "addin manifest", "[--url https://localhost:PORT]")
		base := fs.String("url", web.DefaultBaseURL, "address of 'veer serve --tls' that the spreadsheet loads the add-in from")
		if err := parseFlags(fs, args[1:]); err != nil {
			return err
		}
		b, err := web.Manifest(*base)
		if err != nil {
			return usagef("%v", err)
		}
		if _, err := e.stdout.Write(b); err != nil {
			return err
		}
		fmt.Fprintf(e.stderr, "Save this as veer-manifest.xml and sideload it (addin/web/README.md). The server must run with --tls at %s.\n", *base)
		return nil
	case "metadata":
		fs := newFlags(e, "addin metadata", "[--url https://localhost:PORT]")
		base := fs.String("url", web.DefaultBaseURL, "address of 'veer serve --tls' (for the help links)")
		if err := parseFlags(fs, args[1:]); err != nil {
			return err
		}
		u, err := web.CheckBaseURL(*base)
		if err != nil {
			return usagef("%v", err)
		}
		b, err := web.Metadata(catalog.New().Listing(), u+"/addin/help.html")
		if err != nil {
			return err
		}
		_, err = e.stdout.Write(b)
		return err
	}
	return usagef("unknown addin file %q; say manifest or metadata", args[0])
}

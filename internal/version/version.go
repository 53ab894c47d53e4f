// Package version says which veer this is: the release number of the
// source tree and, when the binary was built from a version-control
// checkout, the commit it was built from.
package version

import (
	"runtime/debug"
	"sync"
)

// Release is the release number of this source tree (numbers separated by
// dots). The Calc extension carries it too.
const Release = "0.1.0"

var (
	once sync.Once
	full string
)

// String is the release number followed, when the build recorded it, by
// the commit and whether the tree had changes, e.g. "0.1.0 (commit
// 3f2a9c1d0e4b, modified)".
func String() string {
	once.Do(func() { full = describe(debug.ReadBuildInfo()) })
	return full
}

func describe(bi *debug.BuildInfo, ok bool) string {
	s := Release
	if !ok {
		return s
	}
	var rev, modified string
	for _, kv := range bi.Settings {
		switch kv.Key {
		case "vcs.revision":
			rev = kv.Value
		case "vcs.modified":
			modified = kv.Value
		}
	}
	if rev == "" {
		return s
	}
	if len(rev) > 12 {
		rev = rev[:12]
	}
	s += " (commit " + rev
	if modified == "true" {
		s += ", modified"
	}
	return s + ")"
}

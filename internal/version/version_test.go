package version

import (
	"regexp"
	"runtime/debug"
	"testing"
)

func TestDescribe(t *testing.T) {
	for _, c := range []struct {
		bi   *debug.BuildInfo
		ok   bool
		want string
	}{
		{nil, false, Release},
		{&debug.BuildInfo{}, true, Release},
		{&debug.BuildInfo{Settings: []debug.BuildSetting{{Key: "vcs.revision", Value: "3f2a9c1d0e4b5a6978"}}}, true, Release + " (commit 3f2a9c1d0e4b)"},
		{&debug.BuildInfo{Settings: []debug.BuildSetting{{Key: "vcs.revision", Value: "abc"}, {Key: "vcs.modified", Value: "true"}}}, true, Release + " (commit abc, modified)"},
	} {
		if got := describe(c.bi, c.ok); got != c.want {
			t.Errorf("describe = %q; want %q", got, c.want)
		}
	}
	if !regexp.MustCompile(`^\d+\.\d+\.\d+`).MatchString(String()) {
		t.Errorf("String() = %q; want it to start with the release number", String())
	}
}

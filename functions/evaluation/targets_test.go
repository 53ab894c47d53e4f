package evaluation_test

import (
	"errors"
	"fmt"
	"strings"
	"testing"

	"veer/functions/chart"
	"veer/functions/evaluation"
)

func TestParseTargets(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want string
	}{
		{"", "[]"},
		{"5,10,20", "[5 10 20]"},
		{" 7.5 , 30 ", "[7.5 30]"},
		// 5·20^(k/9): 5, 6.97, 9.73, 13.6, 18.9, 26.4, 36.8, 51.4, 71.7, 100,
		// inner ones to two significant digits.
		{"5-100", "[5 7 9.7 14 19 26 37 51 72 100]"},
		{"10-1000/3", "[10 100 1000]"},
		{"2-3/4", "[2 2.3 2.6 3]"},
	} {
		got, err := evaluation.ParseTargets(tc.in)
		if err != nil || fmt.Sprint(got) != tc.want && !(tc.want == "[]" && len(got) == 0) {
			t.Errorf("ParseTargets(%q) = %v, %v; want %s", tc.in, got, err, tc.want)
		}
	}
	for _, bad := range []string{"5,", "a-b", "100-5", "5-100/1", "5-100/x", "0,5", "-5", "5-100/500", "inf"} {
		if _, err := evaluation.ParseTargets(bad); !errors.Is(err, chart.ErrSetting) || !strings.Contains(err.Error(), "targets must be") {
			t.Errorf("ParseTargets(%q): %v", bad, err)
		}
	}
}

package rulesexamples

import (
	"context"
	"io/fs"
	"math"
	"testing"

	"veer/functions/rules"
)

// sheet is three workers, worked by hand:
//
//	A: healthy, but one very low reading at 32 (z -2.5) and a jump back up;
//	B: drifting up, chart over its limit from the exam at 43 on;
//	C: one exam at 70, outside the reference ages, centile above 99.
//
// Rows: A1 A2 A3 B1 B2 B3 B4 B5 C1.
func sheet(t *testing.T) []rules.Exam {
	t.Helper()
	row := func(w string, time, z, chart float64, inRange bool) rules.Exam {
		return rules.Exam{
			Worker: w, Time: time, Z: z, Value: 120 + 15*z, Mean: 120, SD: 15,
			Centile: 100 * 0.5 * math.Erfc(-z/math.Sqrt2), Innovation: z,
			ChartUp: chart, Chart: chart, Limit: 4, Signal: chart > 4, InRange: inRange,
		}
	}
	exams := []rules.Exam{
		row("A", 30, 0.1, 0, true),
		row("A", 32, -2.5, 0, true),
		row("A", 35, 0.5, 0.2, true),
		row("B", 40, 1.0, 0.5, true),
		row("B", 41, 2.2, 3.5, true),
		row("B", 43, 2.6, 4.3, true),
		row("B", 44.5, 1.8, 5.6, true),
		row("B", 46, 2.9, 8.0, true),
		row("C", 70, 2.5, 2.0, false),
	}
	if err := rules.Link(exams); err != nil {
		t.Fatal(err)
	}
	return exams
}

const F, T = "FALSE", "TRUE"

// expected gives, for every example rule, its result on each row of
// sheet, worked out by hand from the rule's text (reasons in comments).
func expected() map[string][]string {
	return map[string][]string{
		//                            A1 A2 A3 B1 B2 B3 B4 B5 C1
		"chart_over_limit":    {F, F, F, F, F, T, T, T, F},                // chart 4.3, 5.6, 8.0 > 4
		"side_over_limit":     {"", "", "", "", "", "up", "up", "up", ""}, // an upward chart: chart_down is 0
		"signalled_at_latest": {F, F, F, F, F, F, F, T, F},                // B's last exam
		"approaching_limit":   {F, F, F, F, T, F, F, F, F},                // B2: 3.5 > 3, no signal
		// centile > 99 at B3 (z 2.6), B5 (2.9), C1 (2.5); C has one exam only
		"above_99th_seen_twice_in_5_years": {F, F, F, F, F, T, F, T, F},
		"below_1st_centile":                {F, T, F, F, F, F, F, F, F}, // A2: z -2.5
		"outside_reference_ages":           {F, F, F, F, F, F, F, F, T},
		"screen":                           {F, F, F, F, F, T, T, T, F},
		// last 4 z at B5: 2.2 2.6 1.8 2.9; at B4: 1.0 2.2 2.6 1.8
		"three_of_last_four_z_above_2": {F, F, F, F, F, F, F, T, F},
		"three_of_last_four_filter":    {F, F, F, F, F, F, F, T, F},
		// mean of last 3 z: A3 -0.63; B3 1.93, B4 2.2, B5 2.43
		"persistently_high": {F, F, F, F, F, T, T, T, F},
		// (z - prev_z)/gap: A3 3.0/3 = 1.0 (not > 1), B2 1.2/1
		"fast_rise_z": {F, F, F, F, T, F, F, F, F},
		// value = 120 + 15 z; A3 - A2 = 45, B2 - B1 = 18, B5 - B4 = 16.5
		"jump_in_value":            {F, F, T, F, F, F, F, F, F},
		"repeated_signals":         {F, F, F, F, F, F, T, T, F},
		"signal_persisting_a_year": {F, F, F, F, F, F, T, T, F}, // first signal at 43
		// B2: chart 3.5, centile 98.6, z 2.2 > 2 -> low; C1: centile 99.4 -> medium
		"severity":  {"none", "none", "none", "none", "low", "high", "high", "high", "medium"},
		"next_step": {"", "", "", "", "", "", "", "review: signal older than a year", "check: age outside the reference"},
		// 100 * chart / 4
		"percent_of_limit": {"0", "0", "5", "12.5", "87.5", "107.5", "140", "200", "50"},
		// Trade thresholds. Centile < 5 means z < -1.645: A2 (z -2.5).
		"below_lln": {F, T, F, F, F, F, F, F, F},
		// value = 120 + 15 z: A's first 121.5, 85% of it 103.3; A2 is 82.5.
		// B's first 135, 85% is 114.75, never passed; C has one exam.
		"fev1_fall_15pct": {F, T, F, F, F, F, F, F, F},
		// value >= 140: B2 153, B3 159, B4 147, B5 163.5, C1 157.5
		// (A1 121.5, A2 82.5, A3 127.5, B1 135 are below).
		"sbp_at_or_above_140": {F, F, F, F, T, T, T, T, T},
	}
}

func TestEveryExampleCompilesAndDoesItsJob(t *testing.T) {
	names := Names()
	if len(names) < 4 {
		t.Fatalf("only %d example files", len(names))
	}
	exams := sheet(t)
	cache := rules.NewCache(0, rules.Limits{})
	seen := map[string]bool{}
	expected := expected()
	for _, name := range names {
		data, err := fs.ReadFile(FS(), name)
		if err != nil {
			t.Fatal(err)
		}
		rs, err := rules.ParseRuleSet(data)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		compiled, err := cache.CompileSet(rs)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		for i, nr := range rs.Rules {
			if nr.Doc == "" {
				t.Errorf("%s: rule %s has no description comment", name, nr.Name)
			}
			want, ok := expected[nr.Name]
			if !ok {
				t.Errorf("%s: rule %s has no hand-checked expectation", name, nr.Name)
				continue
			}
			seen[nr.Name] = true
			out := make([]rules.Value, len(exams))
			if err := rules.EvalAll(context.Background(), compiled[i], exams, out); err != nil {
				t.Fatalf("%s: %s: %v", name, nr.Name, err)
			}
			for r, v := range out {
				if v.String() != want[r] {
					t.Errorf("%s: %s on row %d = %q, want %q", name, nr.Name, r+1, v.String(), want[r])
				}
			}
		}
	}
	for n := range expected {
		if !seen[n] {
			t.Errorf("expectation for %s, which no example file defines", n)
		}
	}
}

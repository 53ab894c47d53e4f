package workbook

import (
	"fmt"
	"slices"
	"strings"
	"testing"

	"github.com/xuri/excelize/v2"

	"veer/internal/flagged"
	"veer/internal/workbook/workbooktest"
)

// TestSummaryHoldsNumbers reads the summary sheet back and checks that every
// age and years cell is a number cell (not text such as "{5 20.41}", which
// a styled value written by SetSheetRow would give), with the two-decimal
// format, and that the bar chart's source ranges hold numbers.
func TestSummaryHoldsNumbers(t *testing.T) {
	dir := t.TempDir()
	in := workforceRows(t, 2000)
	path := userWorkbook(t, dir, in)
	data := screenTable(t, in)
	if err := Refresh(path, RefreshOptions{}, data); err != nil {
		t.Fatal(err)
	}
	workbooktest.SummaryNumbers(t, path, DefaultSummarySheet)
}

// TestSummaryFlaggedCounts checks the summary's counts against package
// flagged, with a rule of severity high that flags workers the chart does
// not and a rule without severity that does not flag.
func TestSummaryFlaggedCounts(t *testing.T) {
	dir := t.TempDir()
	in := workforceRows(t, 2000)
	path := userWorkbook(t, dir, in)
	data := screenTable(t, in)
	m := &data.Markers[0]
	m.Rules = append(m.Rules, RuleColumn{Name: "fast rise", Severity: "High",
		Fired: evalRule(t, "has_previous && z - prev_z > 1.5", m.Exams, m.Results, m.Limit)})
	if err := Refresh(path, RefreshOptions{}, data); err != nil {
		t.Fatal(err)
	}
	ws := flagged.Workers(m.Exams, m.Results, m.Rules, m.Limit)
	c := flagged.Count(ws, m.Rules)
	if c.Flagged <= c.Signalled {
		t.Fatalf("the high rule should flag workers the chart does not: %+v", c)
	}
	if c.Rules[0] <= c.Flagged-c.Signalled {
		t.Fatalf("the rule without severity should fire for workers it does not flag: %+v", c)
	}
	f, err := excelize.OpenFile(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := f.GetRows(DefaultSummarySheet, excelize.Options{RawCellValue: true})
	if err != nil {
		t.Fatal(err)
	}
	flagCol := slices.Index(rows[0], "flagged")
	if flagCol < 0 {
		t.Fatalf("no flagged column in the summary header %q", rows[0])
	}
	n := 0
	for _, r := range rows[1:] {
		if len(r) > flagCol && r[flagCol] == "1" {
			n++
		}
	}
	if n != c.Flagged {
		t.Errorf("summary marks %d workers flagged, package flagged counts %d", n, c.Flagged)
	}
	all := strings.Join(flatten(rows), "\n")
	for _, want := range []string{
		fmt.Sprintf("%d of %d workers flagged (flagged: %s", c.Flagged, c.Workers, flagged.Definition),
		fmt.Sprintf("%d of %d workers flagged, %d with a chart signal; rule very high fired for %d; rule fast rise [High] fired for %d.",
			c.Flagged, c.Workers, c.Signalled, c.Rules[0], c.Rules[1]),
	} {
		if !strings.Contains(all, want) {
			t.Errorf("summary notes lack %q", want)
		}
	}
}

package workbook

import (
	"context"
	"encoding/csv"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"
)

// needSoffice skips when LibreOffice is missing, unless VEER_REQUIRE_ALL=1.
func needSoffice(t *testing.T) string {
	t.Helper()
	p, err := exec.LookPath("soffice")
	if err != nil {
		if os.Getenv("VEER_REQUIRE_ALL") == "1" {
			t.Fatal("VEER_REQUIRE_ALL=1 but LibreOffice (soffice) is not installed (apt-get install libreoffice-calc)")
		}
		t.Skip("LibreOffice (soffice) is not installed; install the Debian package libreoffice-calc to run this check")
	}
	return p
}

// sofficeSheets converts every sheet of a workbook to CSV with LibreOffice
// (raw values, not as shown) and returns the rows per sheet name.
func sofficeSheets(t *testing.T, exe, file string, sheets []string) map[string][][]string {
	t.Helper()
	out := t.TempDir()
	profile := "file://" + filepath.Join(t.TempDir(), "profile")
	ctx, cancel := context.WithTimeout(context.Background(), 120*time.Second)
	defer cancel()
	// Filter options: comma, double quote, UTF-8, from line 1, default
	// formats, language, quoted as text off, detect numbers on, save
	// contents as shown OFF (full precision), formulas off, trim off, all
	// sheets (-1).
	cmd := exec.CommandContext(ctx, exe, "-env:UserInstallation="+profile, "--headless", "--norestore",
		"--convert-to", "csv:Text - txt - csv (StarCalc):44,34,76,1,,1033,false,true,false,false,false,-1",
		"--outdir", out, file)
	cmd.Env = append(os.Environ(), "HOME="+t.TempDir())
	if b, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("LibreOffice could not convert %s: %v\n%s", file, err, b)
	}
	base := strings.TrimSuffix(filepath.Base(file), filepath.Ext(file))
	res := map[string][][]string{}
	for _, s := range sheets {
		p := filepath.Join(out, base+"-"+s+".csv")
		f, err := os.Open(p)
		if err != nil {
			ents, _ := os.ReadDir(out)
			var names []string
			for _, e := range ents {
				names = append(names, e.Name())
			}
			t.Fatalf("LibreOffice wrote no CSV for sheet %q (files: %v)", s, names)
		}
		r := csv.NewReader(f)
		r.FieldsPerRecord = -1
		rows, err := r.ReadAll()
		f.Close()
		if err != nil {
			t.Fatal(err)
		}
		res[s] = rows
	}
	return res
}

// TestLibreOfficeReadsRefreshed opens a refreshed workbook in LibreOffice
// Calc, an outside reader: the officer's formulas still compute the same
// values, and the results sheet holds veer's numbers.
func TestLibreOfficeReadsRefreshed(t *testing.T) {
	exe := needSoffice(t)
	dir := t.TempDir()
	in := workforceRows(t, 300)
	path := userWorkbook(t, dir, in)
	tab, err := ReadSheet(path, "Exams")
	if err != nil {
		t.Fatal(err)
	}
	data := screenTable(t, tab)
	// Twice, so LibreOffice reads a workbook whose veer sheets (and chart)
	// were replaced.
	for i := 0; i < 2; i++ {
		if err := Refresh(path, RefreshOptions{}, data); err != nil {
			t.Fatal(err)
		}
	}
	got := sofficeSheets(t, exe, path, []string{"Cover", "Budget", DefaultResultsSheet, DefaultSummarySheet})

	// The officer's formulas, recomputed by LibreOffice.
	var sum float64
	tower := 0
	for _, r := range in.Rows {
		x, _ := strconv.ParseFloat(r[3], 64)
		sum += x
		if r[1] == "tower" {
			tower++
		}
	}
	wantCover := map[[2]int]float64{{2, 1}: float64(len(in.Rows)), {3, 1}: sum / float64(len(in.Rows)), {4, 1}: float64(tower) / float64(len(in.Rows))}
	for rc, want := range wantCover {
		text := got["Cover"][rc[0]][rc[1]]
		scale := 1.0
		if strings.HasSuffix(text, "%") { // percent formats stay in the export
			text, scale = strings.TrimSuffix(text, "%"), 0.01
		}
		v, err := strconv.ParseFloat(text, 64)
		v *= scale
		if err != nil || math.Abs(v-want) > 1e-9*math.Max(1, want) {
			t.Errorf("Cover row %d: LibreOffice computes %q, want %v", rc[0]+1, got["Cover"][rc[0]][rc[1]], want)
		}
	}
	if b := got["Budget"][4][1]; b != "601.5" {
		t.Errorf("Budget!B5 = %q in LibreOffice, want 601.5", b)
	}

	res := got[DefaultResultsSheet]
	if len(res) != len(in.Rows)+1 {
		t.Fatalf("LibreOffice reads %d result rows, want %d", len(res)-1, len(in.Rows))
	}
	nin := len(in.Header)
	m := data.Markers[0]
	for i, r := range m.Results {
		row := res[i+1]
		z, err := strconv.ParseFloat(row[nin], 64)
		if err != nil || math.Abs(z-r.Z) > 1e-12*math.Max(1, math.Abs(r.Z)) {
			t.Fatalf("row %d: LibreOffice reads z %q, veer computed %v", i+2, row[nin], r.Z)
		}
		want := "FALSE"
		if r.Signal {
			want = "TRUE"
		}
		if row[nin+4] != want {
			t.Fatalf("row %d: LibreOffice reads signal %q, want %s", i+2, row[nin+4], want)
		}
	}
	if s := got[DefaultSummarySheet]; len(s) < 2 || s[0][0] != "worker" {
		t.Errorf("LibreOffice reads the summary sheet as %.3q", s)
	}
}

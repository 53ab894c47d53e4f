package workbooks

import (
	"context"
	"encoding/csv"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"veer/examples"
)

// TestLibreOfficeOpensWorkbooks opens both example workbooks in LibreOffice
// Calc (headless), an outside reader, and checks what it computes: the Exams
// sheet holds the workforce, the per-row references and COUNTA over the
// Exams columns compute (so the OpenFormula references are understood), and
// the VEER functions are there to be computed once the extension is
// installed. Skipped without LibreOffice unless VEER_REQUIRE_ALL=1.
func TestLibreOfficeOpensWorkbooks(t *testing.T) {
	exe, err := exec.LookPath("soffice")
	if err != nil {
		if os.Getenv("VEER_REQUIRE_ALL") == "1" {
			t.Fatal("VEER_REQUIRE_ALL=1 but LibreOffice (soffice) is not installed (apt-get install libreoffice-calc)")
		}
		t.Skip("LibreOffice (soffice) is not installed; install the Debian package libreoffice-calc to run this check")
	}
	x, o := built(t)
	in := t.TempDir()
	files := map[string]string{"xlsx": filepath.Join(in, "book-x.xlsx"), "ods": filepath.Join(in, "book-o.ods")}
	if err := os.WriteFile(files["xlsx"], x, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(files["ods"], o, 0o644); err != nil {
		t.Fatal(err)
	}
	out := t.TempDir()
	ctx, cancel := context.WithTimeout(context.Background(), 180*time.Second)
	defer cancel()
	// CSV of every sheet (-1), raw values, UTF-8.
	cmd := exec.CommandContext(ctx, exe, "-env:UserInstallation=file://"+filepath.Join(t.TempDir(), "profile"),
		"--headless", "--norestore", "--convert-to", "csv:Text - txt - csv (StarCalc):44,34,76,1,,1033,false,true,false,false,false,-1",
		"--outdir", out, files["xlsx"], files["ods"])
	cmd.Env = append(os.Environ(), "HOME="+t.TempDir())
	if b, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("LibreOffice could not convert the workbooks: %v\n%s", err, b)
	}
	wf := demoTable(t, examples.WorkforceCSV())
	for kind, base := range map[string]string{"xlsx": "book-x", "ods": "book-o"} {
		read := func(sheet string) [][]string {
			f, err := os.Open(filepath.Join(out, base+"-"+sheet+".csv"))
			if err != nil {
				t.Fatalf("%s: LibreOffice wrote no CSV for sheet %s: %v", kind, sheet, err)
			}
			defer f.Close()
			r := csv.NewReader(f)
			r.FieldsPerRecord = -1
			rows, err := r.ReadAll()
			if err != nil {
				t.Fatal(err)
			}
			return rows
		}
		exams := read(ExamsSheet)
		if len(exams) != len(wf.Rows)+1 || !equal(exams[0], wf.Header) {
			t.Fatalf("%s: LibreOffice reads %d exam rows with header %q", kind, len(exams)-1, exams[0])
		}
		for i, r := range wf.Rows {
			for j, v := range r {
				if !sameNumberOrText(exams[i+1][j], v) {
					t.Fatalf("%s: Exams row %d column %s: LibreOffice reads %q, want %q", kind, i+2, wf.Header[j], exams[i+1][j], v)
				}
			}
		}
		scr := read(ScreeningSheet)
		for i, r := range wf.Rows {
			if scr[i+1][0] != r[0] || !sameNumberOrText(scr[i+1][2], r[2]) {
				t.Fatalf("%s: Screening row %d: LibreOffice computes %q/%q from =Exams!A/C, want %q/%q", kind, i+2, scr[i+1][0], scr[i+1][2], r[0], r[2])
			}
		}
		// The COUNTA cell of the summary block.
		found := false
		for _, row := range scr[:10] {
			for c := 0; c+1 < len(row); c++ {
				if row[c] == "exams on the Exams sheet" {
					found = true
					if row[c+1] != strconv.Itoa(len(wf.Rows)) {
						t.Errorf("%s: COUNTA over the Exams ids gives %q in LibreOffice, want %d", kind, row[c+1], len(wf.Rows))
					}
				}
			}
		}
		if !found {
			t.Errorf("%s: the summary block is missing", kind)
		}
		set := read(SettingsSheet)
		if set[4][0] != "model" || set[4][1] != "demo-sbp" {
			t.Errorf("%s: Settings row 5 reads %q", kind, set[4])
		}
	}
}

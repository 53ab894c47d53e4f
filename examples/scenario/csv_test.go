package scenario

import (
	"bytes"
	"reflect"
	"strings"
	"testing"
)

func TestEncodeExamsFormat(t *testing.T) {
	exams := []Exam{
		{Worker: "W00001", Group: Tower, Age: 23.5, SBP: 121, FEV1: 4.1},
		{Worker: "W00001", Group: Tower, Age: 24.567, SBP: 119.6, FEV1: 3.999},
		{Worker: "odd, name", Group: Workshop, Age: 30, SBP: 130, FEV1: 3},
	}
	want := "worker,group,age,sbp,fev1\n" +
		"W00001,tower,23.50,121,4.10\n" +
		"W00001,tower,24.57,120,4.00\n" +
		"\"odd, name\",workshop,30.00,130,3.00\n"
	if got := string(EncodeExams(exams)); got != want {
		t.Errorf("EncodeExams:\n%s\nwant:\n%s", got, want)
	}
}

func TestEncodeTruthFormat(t *testing.T) {
	truth := []Truth{
		{Worker: "W00001", Group: Tower},
		{Worker: "W00002", Group: Workshop, SBP: Onset{Affected: true, Age: 41.256, Slope: 0.3, Plateau: 1.2345}, FEV1: Onset{Affected: true, Age: 39, Slope: -0.25, Plateau: -1}},
	}
	want := "worker,group,affected_sbp,onset_sbp,affected_fev1,onset_fev1,slope_sbp,slope_fev1,plateau_sbp,plateau_fev1\n" +
		"W00001,tower,0,,0,,,,,\n" +
		"W00002,workshop,1,41.26,1,39.00,0.300,-0.250,1.234,-1.000\n"
	if got := string(EncodeTruth(truth)); got != want {
		t.Errorf("EncodeTruth:\n%s\nwant:\n%s", got, want)
	}
}

func TestRoundTrip(t *testing.T) {
	cfg := DefaultConfig()
	cfg.ReferenceWorkers, cfg.WorkforceWorkers, cfg.AffectedShare = 30, 60, 0.5
	s, err := Generate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	exams, err := ParseExams(s.WorkforceCSV())
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(exams, s.Workforce) {
		t.Error("ParseExams(WorkforceCSV()) differs from the generated exams")
	}
	truth, err := ParseTruth(s.TruthCSV())
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(truth, s.Truth) {
		t.Error("ParseTruth(TruthCSV()) differs from the generated truth")
	}
	// Columns may come in any order, with extra columns and a BOM.
	reordered := "\ufefffev1,Note,SBP,age,group,worker\n4.00,x,120,30.00,tower,W1\n"
	got, err := ParseExams([]byte(reordered))
	want := []Exam{{Worker: "W1", Group: "tower", Age: 30, SBP: 120, FEV1: 4}}
	if err != nil || !reflect.DeepEqual(got, want) {
		t.Errorf("ParseExams(reordered) = %+v, %v; want %+v", got, err, want)
	}
}

func TestParseErrors(t *testing.T) {
	const head = "worker,group,age,sbp,fev1\n"
	const thead = "worker,group,affected_sbp,onset_sbp,affected_fev1,onset_fev1,slope_sbp,slope_fev1,plateau_sbp,plateau_fev1\n"
	tests := []struct {
		name  string
		truth bool
		data  string
		want  string
	}{
		{"empty", false, "", "the file is empty"},
		{"missing column", false, "worker,group,age,sbp\nW1,tower,30,120\n", `no column "fev1"`},
		{"bad age", false, head + "W1,tower,thirty,120,4\n", `row 2, column "age": expected an age in years from 0 to 130, got "thirty"`},
		{"age NaN", false, head + "W1,tower,NaN,120,4\n", `column "age"`},
		{"sbp too high", false, head + "W1,tower,30,120,4\nW1,tower,31,900,4\n", `row 3, column "sbp"`},
		{"fev1 zero", false, head + "W1,tower,30,120,0\n", `row 2, column "fev1"`},
		{"empty worker", false, head + " ,tower,30,120,4\n", `row 2, column "worker": expected a name`},
		{"short row", false, head + "W1,tower,30\n", "cannot read the rows"},
		{"truth without plateau", true, "worker,group,affected_sbp,onset_sbp,affected_fev1,onset_fev1,slope_sbp,slope_fev1\nW1,tower,0,,0,,,\n", `no column "plateau_sbp"`},
		{"bad affected", true, thead + "W1,tower,yes,,0,,,,,\n", `column "affected_sbp": expected 1 (affected) or 0`},
		{"onset without affected", true, thead + "W1,tower,0,40,0,,,,,\n", "affected_sbp is 0, so onset_sbp, slope_sbp and plateau_sbp must be empty"},
		{"plateau without affected", true, thead + "W1,tower,0,,0,,,,,-1\n", "affected_fev1 is 0, so onset_fev1, slope_fev1 and plateau_fev1 must be empty"},
		{"affected without onset", true, thead + "W1,tower,0,,1,,,,,\n", `row 2, column "onset_fev1"`},
		{"bad slope", true, thead + "W1,tower,1,40.00,0,,fast,,1,\n", `column "slope_sbp"`},
		{"missing plateau", true, thead + "W1,tower,1,40.00,0,,0.5,,,\n", `row 2, column "plateau_sbp": expected a sustained shift in SD`},
		{"signs differ", true, thead + "W1,tower,0,,1,40.00,,-0.5,,1.2\n", "row 2: slope_fev1 (-0.5) and plateau_fev1 (1.2) must have the same sign"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var err error
			if tc.truth {
				_, err = ParseTruth([]byte(tc.data))
			} else {
				_, err = ParseExams([]byte(tc.data))
			}
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error = %v; want it to contain %q", err, tc.want)
			}
		})
	}
}

// FuzzParseExams checks that ParseExams never panics and that whatever it
// accepts survives an encode/parse cycle: encoding is idempotent after one
// rounding.
func FuzzParseExams(f *testing.F) {
	f.Add([]byte("worker,group,age,sbp,fev1\nW00001,tower,23.29,129,4.32\n"))
	f.Add([]byte("fev1,sbp,age,group,worker,x\n4,120,30,tower,\"W,1\",\n"))
	f.Add([]byte("worker,group,age,sbp,fev1\nW1,tower,1e2,40.4,0.1\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		exams, err := ParseExams(data)
		if err != nil {
			return
		}
		once := EncodeExams(exams)
		again, err := ParseExams(once)
		if err != nil {
			t.Fatalf("re-parsing encoded exams failed: %v\n%s", err, once)
		}
		if twice := EncodeExams(again); !bytes.Equal(once, twice) {
			t.Fatalf("encoding is not stable:\n%s\n%s", once, twice)
		}
	})
}

// FuzzParseTruth is FuzzParseExams for truth files.
func FuzzParseTruth(f *testing.F) {
	const head = "worker,group,affected_sbp,onset_sbp,affected_fev1,onset_fev1,slope_sbp,slope_fev1,plateau_sbp,plateau_fev1\n"
	f.Add([]byte(head + "W1,tower,1,41.26,0,,0.300,,1.200,\n"))
	f.Add([]byte(head + "W1,tower,0,,1,39,,-0.25,,-1.4\n"))
	f.Add([]byte(head + "W1,tower,1,40,0,,0.0004,,0.0004,\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		truth, err := ParseTruth(data)
		if err != nil {
			return
		}
		once := EncodeTruth(truth)
		again, err := ParseTruth(once)
		if err != nil {
			t.Fatalf("re-parsing encoded truth failed: %v\n%s", err, once)
		}
		if twice := EncodeTruth(again); !bytes.Equal(once, twice) {
			t.Fatalf("encoding is not stable:\n%s\n%s", once, twice)
		}
	})
}

func TestEncodeOutcomesFormat(t *testing.T) {
	got := string(EncodeOutcomes([]Outcome{
		{Worker: "W00001"},
		{Worker: "W00002", Hypertension: Diagnosis{Diagnosed: true, Age: 47.126}, Obstruction: Diagnosis{Diagnosed: true, Age: 50}},
	}))
	want := "worker,hypertension,hypertension_age,obstruction,obstruction_age\nW00001,no,,no,\nW00002,yes,47.13,yes,50.00\n"
	if got != want {
		t.Errorf("EncodeOutcomes:\n%s\nwant\n%s", got, want)
	}
}

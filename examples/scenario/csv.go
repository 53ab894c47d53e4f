package scenario

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"strconv"
	"strings"
)

// ExamHeader returns the header of reference.csv and workforce.csv.
func ExamHeader() []string { return []string{"worker", "group", "age", "sbp", "fev1"} }

// TruthHeader returns the header of truth.csv.
func TruthHeader() []string {
	return []string{"worker", "group", "affected_sbp", "onset_sbp", "affected_fev1", "onset_fev1", "slope_sbp", "slope_fev1", "plateau_sbp", "plateau_fev1"}
}

// OutcomesHeader returns the header of outcomes.csv.
func OutcomesHeader() []string {
	return []string{"worker", "hypertension", "hypertension_age", "obstruction", "obstruction_age"}
}

// ReferenceCSV encodes the reference cohort with EncodeExams.
func (s *Scenario) ReferenceCSV() []byte { return EncodeExams(s.Reference) }

// WorkforceCSV encodes the workforce with EncodeExams.
func (s *Scenario) WorkforceCSV() []byte { return EncodeExams(s.Workforce) }

// TruthCSV encodes the truth with EncodeTruth.
func (s *Scenario) TruthCSV() []byte { return EncodeTruth(s.Truth) }

// OutcomesCSV encodes the outcomes with EncodeOutcomes.
func (s *Scenario) OutcomesCSV() []byte { return EncodeOutcomes(s.Outcomes) }

// EncodeOutcomes writes the outcomes as CSV with the header
// worker,hypertension,hypertension_age,obstruction,obstruction_age: yes or
// no, and the age at diagnosis with 2 decimals, empty when not diagnosed.
// This is the outcomes table veer evaluate reads.
func EncodeOutcomes(outs []Outcome) []byte {
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	_ = w.Write(OutcomesHeader())
	field := func(d Diagnosis) (string, string) {
		if !d.Diagnosed {
			return "no", ""
		}
		return "yes", strconv.FormatFloat(d.Age, 'f', 2, 64)
	}
	for _, o := range outs {
		h, ha := field(o.Hypertension)
		b, ba := field(o.Obstruction)
		_ = w.Write([]string{o.Worker, h, ha, b, ba})
	}
	w.Flush()
	return buf.Bytes()
}

// EncodeExams writes exams as CSV with the header worker,group,age,sbp,fev1,
// "\n" line ends and fixed decimals (age 2, sbp 0, fev1 2), so the same
// exams always give the same bytes.
func EncodeExams(exams []Exam) []byte {
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	_ = w.Write(ExamHeader()) // writes to a bytes.Buffer cannot fail
	for _, e := range exams {
		_ = w.Write([]string{
			e.Worker,
			e.Group,
			strconv.FormatFloat(e.Age, 'f', 2, 64),
			strconv.FormatFloat(e.SBP, 'f', 0, 64),
			strconv.FormatFloat(e.FEV1, 'f', 2, 64),
		})
	}
	w.Flush()
	return buf.Bytes()
}

// EncodeTruth writes the truth as CSV with the header
// worker,group,affected_sbp,onset_sbp,affected_fev1,onset_fev1,slope_sbp,slope_fev1,plateau_sbp,plateau_fev1.
// affected_* are 1 or 0; onset ages have 2 decimals, slopes (SD per year)
// and plateaus (SD) 3 decimals, all left empty for a marker in which the
// worker is not affected.
func EncodeTruth(truth []Truth) []byte {
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	_ = w.Write(TruthHeader())
	for _, t := range truth {
		aS, oS, sS, pS := onsetFields(t.SBP)
		aF, oF, sF, pF := onsetFields(t.FEV1)
		_ = w.Write([]string{t.Worker, t.Group, aS, oS, aF, oF, sS, sF, pS, pF})
	}
	w.Flush()
	return buf.Bytes()
}

func onsetFields(o Onset) (affected, age, slope, plateau string) {
	if !o.Affected {
		return "0", "", "", ""
	}
	return "1", strconv.FormatFloat(o.Age, 'f', 2, 64), strconv.FormatFloat(o.Slope, 'f', 3, 64), strconv.FormatFloat(o.Plateau, 'f', 3, 64)
}

// ParseExams reads a CSV file with the columns worker, group, age, sbp and
// fev1 (named in the first row, in any order; other columns are ignored),
// as written by EncodeExams. Readings outside plausible ranges (age 0 to
// 130 years, SBP 40 to 300 mmHg, FEV1 0.1 to 10 L) are rejected with the row
// and column named.
func ParseExams(data []byte) ([]Exam, error) {
	rows, col, err := readTable(data, ExamHeader())
	if err != nil {
		return nil, err
	}
	exams := make([]Exam, 0, len(rows))
	for i, r := range rows {
		line := i + 2
		e := Exam{Worker: r[col["worker"]], Group: r[col["group"]]}
		if err := checkName(r[col["worker"]], line, "worker"); err != nil {
			return nil, err
		}
		if err := checkName(r[col["group"]], line, "group"); err != nil {
			return nil, err
		}
		if e.Age, err = number(r[col["age"]], line, "age", "an age in years from 0 to 130", 0, 130); err != nil {
			return nil, err
		}
		if e.SBP, err = number(r[col["sbp"]], line, "sbp", "a systolic blood pressure from 40 to 300 mmHg", 40, 300); err != nil {
			return nil, err
		}
		if e.FEV1, err = number(r[col["fev1"]], line, "fev1", "an FEV1 from 0.1 to 10 litres", 0.1, 10); err != nil {
			return nil, err
		}
		exams = append(exams, e)
	}
	return exams, nil
}

// ParseTruth reads a CSV file with the columns of EncodeTruth (named in the
// first row, in any order; other columns are ignored).
func ParseTruth(data []byte) ([]Truth, error) {
	rows, col, err := readTable(data, TruthHeader())
	if err != nil {
		return nil, err
	}
	truth := make([]Truth, 0, len(rows))
	for i, r := range rows {
		line := i + 2
		t := Truth{Worker: r[col["worker"]], Group: r[col["group"]]}
		if err := checkName(t.Worker, line, "worker"); err != nil {
			return nil, err
		}
		if err := checkName(t.Group, line, "group"); err != nil {
			return nil, err
		}
		if t.SBP, err = onset(r, col, line, "sbp"); err != nil {
			return nil, err
		}
		if t.FEV1, err = onset(r, col, line, "fev1"); err != nil {
			return nil, err
		}
		truth = append(truth, t)
	}
	return truth, nil
}

func onset(r []string, col map[string]int, line int, marker string) (Onset, error) {
	aCol, oCol, sCol, pCol := "affected_"+marker, "onset_"+marker, "slope_"+marker, "plateau_"+marker
	switch a := strings.TrimSpace(r[col[aCol]]); a {
	case "0":
		if r[col[oCol]] != "" || r[col[sCol]] != "" || r[col[pCol]] != "" {
			return Onset{}, fmt.Errorf("row %d: %s is 0, so %s, %s and %s must be empty", line, aCol, oCol, sCol, pCol)
		}
		return Onset{}, nil
	case "1":
		age, err := number(r[col[oCol]], line, oCol, "an onset age in years from 0 to 130", 0, 130)
		if err != nil {
			return Onset{}, err
		}
		slope, err := number(r[col[sCol]], line, sCol, "a drift in SD per year from -100 to 100", -100, 100)
		if err != nil {
			return Onset{}, err
		}
		plateau, err := number(r[col[pCol]], line, pCol, "a sustained shift in SD from -100 to 100", -100, 100)
		if err != nil {
			return Onset{}, err
		}
		if slope*plateau < 0 {
			return Onset{}, fmt.Errorf("row %d: %s (%s) and %s (%s) must have the same sign", line, sCol, r[col[sCol]], pCol, r[col[pCol]])
		}
		return Onset{Affected: true, Age: age, Slope: slope, Plateau: plateau}, nil
	default:
		return Onset{}, fmt.Errorf("row %d, column %q: expected 1 (affected) or 0 (not affected), got %q", line, aCol, a)
	}
}

// readTable parses CSV data, checks that the header names every wanted
// column, and returns the data rows and each column's position.
func readTable(data []byte, want []string) ([][]string, map[string]int, error) {
	r := csv.NewReader(bytes.NewReader(data))
	r.ReuseRecord = false
	header, err := r.Read()
	if errors.Is(err, io.EOF) {
		return nil, nil, fmt.Errorf("the file is empty; expected a header row with the columns %s", strings.Join(want, ", "))
	}
	if err != nil {
		return nil, nil, fmt.Errorf("cannot read the header row: %v", err)
	}
	col := make(map[string]int, len(header))
	for i, h := range header {
		h = strings.ToLower(strings.TrimSpace(strings.TrimPrefix(h, "\ufeff")))
		if _, dup := col[h]; !dup {
			col[h] = i
		}
	}
	for _, w := range want {
		if _, ok := col[w]; !ok {
			return nil, nil, fmt.Errorf("the header row has no column %q; expected the columns %s", w, strings.Join(want, ", "))
		}
	}
	rows, err := r.ReadAll()
	if err != nil {
		return nil, nil, fmt.Errorf("cannot read the rows after the header: %v", err)
	}
	return rows, col, nil
}

func checkName(s string, line int, column string) error {
	if strings.TrimSpace(s) == "" {
		return fmt.Errorf("row %d, column %q: expected a name, got an empty cell", line, column)
	}
	return nil
}

func number(s string, line int, column, what string, lo, hi float64) (float64, error) {
	v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	if err != nil || !(v >= lo && v <= hi) {
		return 0, fmt.Errorf("row %d, column %q: expected %s, got %q", line, column, what, s)
	}
	return v, nil
}

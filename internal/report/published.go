package report

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"veer/functions/published"
	"veer/functions/screening"
)

// covariatesOf returns the covariates of the exams rows (in the model's
// order): the median of each over the rows, NaN where none is known.
// Covariates such as height change little within a worker; the median
// stands for the worker (or, over a group, for a typical worker).
func covariatesOf(s *Section, rows []int) []float64 {
	k := len(s.Model.Reference().Covariates())
	if k == 0 {
		return nil
	}
	out := make([]float64, k)
	for c := range out {
		var v []float64
		for _, i := range rows {
			if cv := s.Exams[i].Covariates; c < len(cv) && !math.IsNaN(cv[c]) {
				v = append(v, cv[c])
			}
		}
		out[c] = math.NaN()
		if len(v) > 0 {
			sort.Float64s(v)
			out[c] = (v[(len(v)-1)/2] + v[len(v)/2]) / 2
		}
	}
	return out
}

// covariateText is ", height 178" for a worker's rows (empty without
// covariates).
func covariateText(s *Section, rows []int) string {
	cv := covariatesOf(s, rows)
	if cv == nil {
		return ""
	}
	var b strings.Builder
	for c, name := range s.Model.Reference().Covariates() {
		b.WriteString(", " + name + " " + num(cv[c], 4) + unitOf(s.Model, name))
	}
	return b.String()
}

func unitOf(m *screening.Model, name string) string {
	if m.Published == nil {
		return ""
	}
	for _, c := range m.Published.Covariates() {
		if c.Name == name && c.Unit != "" {
			return " " + c.Unit
		}
	}
	return ""
}

// groupRows are the rows of group g in the section.
func groupRows(s *Section, g string) []int {
	var out []int
	for i, e := range s.Exams {
		if e.Group == g {
			out = append(out, i)
		}
	}
	return out
}

// referenceName says what a published reference is, in words.
func referenceName(m *screening.Model) string {
	info := m.Published.Info()
	what := "LMS centile table"
	if len(m.Published.Covariates()) > 0 || info.Name != "" {
		what = "reference equations"
	}
	if m.Published.Form() == published.FormMeanSD {
		what = "reference equations (mean and SD)"
	}
	s := "the published " + what
	if info.Name != "" {
		s += " “" + info.Name + "”"
	}
	if info.Source != "" {
		s += " (" + info.Source + ")"
	}
	return s
}

// assumptions are what the officer should review about a model on a
// published reference: the reference itself and the serial model.
func assumptions(m *screening.Model) []string {
	ref := m.Reference()
	out := []string{"The reference is " + referenceName(m) + ". Screening assumes it describes healthy workers like these; " +
		"check a few of its values against the publication before relying on it."}
	if cv := ref.Covariates(); len(cv) > 0 {
		out = append(out, "The reference uses "+strings.Join(cv, ", ")+" besides age; each worker is compared with the reference at the worker's own "+
			strings.Join(cv, ", ")+" (the group figures above are drawn at the group's median).")
	}
	s := m.Serial
	switch m.SerialSource {
	case screening.SerialFromUser:
		out = append(out, fmt.Sprintf("The serial correlation of a worker's readings (φ = %s per year, persistent share c = %s) was set by the user, "+
			"not estimated from data. The whitening of each worker's readings and the limit depend on it.", num(s.Phi, 3), num(s.C, 3)))
	default:
		w := m.Workforce
		t := fmt.Sprintf("There is no healthy reference cohort: the serial correlation of a worker's readings (φ = %s per year, standard error %s; "+
			"persistent share c = %s, standard error %s) was estimated from the screened workforce's own exams (%d workers with repeated exams",
			num(s.Phi, 3), num(s.SEPhi, 2), num(s.C, 3), num(s.SEC, 2), s.Workers)
		if w != nil && w.FirstPassTarget > 0 {
			t += fmt.Sprintf("; %d workers flagged by a first screening pass at a %s-year target were left out", w.LeftOut, num(w.FirstPassTarget, 3))
		}
		t += "). Workers who drift make readings look more persistent than they are in health; the limit and the whitening depend on this estimate."
		out = append(out, t)
		if w != nil {
			note := fmt.Sprintf("Against the reference, the workforce's standardised readings have mean %s and SD %s (about 0 and 1 if the reference describes this workforce)",
				num(w.Location, 2), num(w.Scale, 2))
			if math.Abs(w.Location) > 0.3 || math.Abs(w.Scale-1) > 0.25 {
				note += "; they differ enough that the reference may not suit this workforce, and signals will not come at the agreed rate"
			}
			out = append(out, note+".")
		}
	}
	return out
}

// publishedDiagnostics are the diagnostics tables of a model on a
// published reference.
func publishedDiagnostics(m *screening.Model) ([]groupDiag, []kv, []string) {
	ref := m.Reference()
	var gd []groupDiag
	for _, g := range ref.Groups() {
		lo, hi, _ := ref.Range(g)
		gd = append(gd, groupDiag{Group: groupName(g), Rows: []kv{{"Age range of the reference", age(lo) + "–" + age(hi) + " years"}}})
	}
	sd := m.SerialDiagnostics
	model := []kv{
		{"Model", m.Name},
		{"Reference", referenceName(m)},
		{"Between the reference's tabulated ages", string(m.Published.Interpolation()) + " interpolation"},
	}
	if cv := ref.Covariates(); len(cv) > 0 {
		model = append(model, kv{"Covariates besides age", strings.Join(cv, ", ")})
	}
	model = append(model,
		kv{"Serial correlation φ (per year)", num(m.Serial.Phi, 3) + seNote(m.Serial.SEPhi)},
		kv{"Persistent share of variance c", num(m.Serial.C, 3) + seNote(m.Serial.SEC)},
		kv{"Serial model", screening.SerialSourceText(m.SerialSource)},
	)
	if m.MeanGap > 0 {
		model = append(model, kv{"Mean time between the workforce's exams", num(m.MeanGap, 3) + " years"})
	}
	if sd.Exams > 0 {
		model = append(model,
			kv{"Innovations: mean and SD (expected 0 and 1)", num(sd.Mean, 3) + " and " + num(sd.SD, 3)},
			kv{"Innovations: lag-1 correlation within workers", num(sd.Lag1, 3) + ", p = " + pval(sd.Lag1P) + " (" + thousands(sd.Pairs) + " pairs)"},
			kv{"Innovations: normality (D'Agostino–Pearson K²)", num(sd.Normality, 3) + ", p = " + pval(sd.NormalityP)},
		)
	}
	if len(m.Hash) >= 12 {
		model = append(model, kv{"Model fingerprint", m.Hash[:12]})
	}
	return gd, model, nil
}

package screening

import (
	"fmt"

	"veer/functions/transform"
)

// Item is one line of a model's diagnostics: a label and a value that is a
// number or a text.
type Item struct {
	Name  string
	Value any
}

// Items lists the model's diagnostics for a reviewer, in a fixed order:
// per group the counts, age range, bandwidths, band coverage and normality
// check; then the serial correlation with its checks and the mean gap.
func (m *Model) Items() []Item {
	if m.Published != nil {
		return m.publishedItems()
	}
	items := []Item{
		{"model", m.Name},
		{"transform", string(m.Curves.Transform)},
	}
	if m.Curves.Transform == transform.BoxCox {
		items = append(items, Item{"box-cox lambda", m.Curves.Lambda})
	}
	items = append(items, Item{"exams fitted", m.Curves.Rows})
	for _, c := range m.Curves.Curves {
		d := c.Diagnostics
		g := c.Group
		if g == "" {
			g = "all"
		}
		p := "group " + g + ": "
		items = append(items,
			Item{p + "workers", d.Workers},
			Item{p + "exams", d.Exams},
			Item{p + "age from", d.TimeMin},
			Item{p + "age to", d.TimeMax},
			Item{p + "mean bandwidth (years, " + d.MeanBandwidthSource + ")", d.MeanBandwidth},
			Item{p + "sd bandwidth (years, " + d.SDBandwidthSource + ")", d.SDBandwidth},
			Item{p + "share inside central 95% band", d.Coverage95},
		)
		if d.Normality != nil {
			items = append(items,
				Item{p + "normality p-value (D'Agostino-Pearson)", d.Normality.PValue},
				Item{p + "skewness", d.Normality.Skewness},
			)
		}
		for _, w := range d.Warnings {
			items = append(items, Item{p + "note", w})
		}
	}
	return append(items, m.serialItems()...)
}

// serialItems are the serial model's lines of Items, and the rest.
func (m *Model) serialItems() []Item {
	var items []Item
	kept := "reference workers kept for bootstrap"
	if m.Published != nil {
		kept = "workforce workers kept for bootstrap"
	}
	s, sd := m.Serial, m.SerialDiagnostics
	finding := "serial correlation detected"
	if s.NoCorrelationDetected() {
		finding = "no serial correlation detected"
	}
	items = append(items, Item{"serial correlation", finding})
	if t := s.Test; s.Tested() {
		items = append(items,
			Item{"consecutive exams correlation", t.Corr},
			Item{"no-correlation test p-value (one-sided t)", t.P},
		)
	}
	items = append(items,
		Item{"serial correlation phi (per year)", s.Phi},
		Item{"phi standard error (0: not available)", s.SEPhi},
		Item{"persistent share c", s.C},
		Item{"c standard error (0: not available)", s.SEC},
		Item{"pairs of exams used", s.Pairs},
		Item{"innovations lag-1 correlation", sd.Lag1},
		Item{"innovations lag-1 p-value", sd.Lag1P},
		Item{"innovations normality p-value", sd.NormalityP},
		Item{"mean gap between exams (years)", m.MeanGap},
		Item{kept, len(m.Sample)},
		Item{"content hash", fmt.Sprintf("%.16s", m.Hash)},
	)
	return items
}

// publishedItems are Items for a model on a published reference: what the
// reference is, its groups and ages, and where the serial model comes from
// (an assumption the reviewer should see).
func (m *Model) publishedItems() []Item {
	ref := m.Reference()
	info := m.Published.Info()
	items := []Item{
		{"model", m.Name},
		{"reference", "published (" + string(m.Published.Form()) + ")"},
	}
	if info.Name != "" {
		items = append(items, Item{"reference name", info.Name})
	}
	if info.Source != "" {
		items = append(items, Item{"reference source", info.Source})
	}
	items = append(items, Item{"interpolation between ages", string(m.Published.Interpolation())})
	for _, c := range m.Published.Covariates() {
		items = append(items, Item{"covariate", c.Name})
	}
	for _, g := range ref.Groups() {
		lo, hi, _ := ref.Range(g)
		name := g
		if name == "" {
			name = "all"
		}
		items = append(items, Item{"group " + name + ": age from", lo}, Item{"group " + name + ": age to", hi})
	}
	items = append(items, Item{"serial model", SerialSourceText(m.SerialSource)})
	if w := m.Workforce; w != nil {
		items = append(items,
			Item{"workforce workers", w.Workers},
			Item{"workers with repeated exams", w.Longitudinal},
			Item{"workers left out after a first pass", w.LeftOut},
			Item{"first-pass target (years, 0: none)", w.FirstPassTarget},
			Item{"workforce z mean against the reference", w.Location},
			Item{"workforce z SD against the reference", w.Scale},
		)
	}
	return append(items, m.serialItems()...)
}

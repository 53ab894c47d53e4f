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
		Item{"reference workers kept for bootstrap", len(m.Sample)},
		Item{"content hash", fmt.Sprintf("%.16s", m.Hash)},
	)
	return items
}

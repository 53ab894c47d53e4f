// Several markers at once: a values range of several columns fits and
// charts a model of several markers; side takes one direction per marker;
// a marker of such a model is named "model/marker" in the lookups.

package catalog

import (
	"context"
	"fmt"
	"math"
	"strconv"
	"strings"

	"veer/functions/cell"
	"veer/functions/chart"
	"veer/functions/joint"
	"veer/functions/monitor"
	"veer/functions/refcurve"
	"veer/functions/screening"
	"veer/functions/transform"
)

// decodeAny decodes a stored model document of one marker or several.
func decodeAny(env cell.Env, ref cell.ModelRef) (any, error) {
	return env.Once("veer.model:"+ref.Handle+":"+ref.SHA256, func() (any, error) {
		if screening.IsJoint(ref.Doc) {
			j, err := screening.DecodeJoint(ref.Doc)
			if err != nil {
				return nil, cell.UnknownModel.Errorf("model %s cannot be read: %v", ref.Handle, err)
			}
			return j, nil
		}
		m, err := screening.Decode(ref.Doc)
		if err != nil {
			return nil, cell.UnknownModel.Errorf("model %s cannot be read: %v", ref.Handle, err)
		}
		return m, nil
	})
}

// loadAny returns the model a cell names: one marker (*screening.Model) or
// several (*screening.Joint). "name/marker" names one marker of a model of
// several.
func loadAny(env cell.Env, name string) (*screening.Model, *screening.Joint, cell.ModelRef, error) {
	base, marker, sub := strings.Cut(name, "/")
	ref, err := env.Model(base)
	if err != nil {
		return nil, nil, ref, err
	}
	if isRuleSet(ref.Doc) {
		return nil, nil, ref, cell.UnknownModel.Errorf("%s is a rule set saved with VEER.SAVERULES, not a model; give a model fitted with VEER.FIT", ref.Handle)
	}
	v, err := decodeAny(env, ref)
	if err != nil {
		return nil, nil, ref, err
	}
	switch m := v.(type) {
	case *screening.Model:
		if sub {
			return nil, nil, ref, cell.UnknownModel.Errorf("model %s holds one marker; name it without /%s", ref.Handle, marker)
		}
		return m, nil, ref, nil
	case *screening.Joint:
		if !sub {
			return nil, m, ref, nil
		}
		if mm := m.Marker(marker); mm != nil {
			return mm, nil, ref, nil
		}
		return nil, nil, ref, cell.UnknownModel.Errorf("model %s holds the markers %s, not %q", ref.Handle, strings.Join(m.MarkerNames(), ", "), marker)
	}
	return nil, nil, ref, fmt.Errorf("model %s: unexpected content", ref.Handle)
}

// anyModelArg reads the model argument i, of one marker or several.
func anyModelArg(env cell.Env, a cell.Args, i int) (*screening.Model, *screening.Joint, cell.ModelRef, error) {
	name, err := a.Text(i)
	if err != nil {
		return nil, nil, cell.ModelRef{}, err
	}
	if strings.TrimSpace(name) == "" {
		return nil, nil, cell.ModelRef{}, cell.WrongArgument.Errorf("the model name (argument %s) is empty", a.Func().ArgName(i))
	}
	return loadAny(env, strings.TrimSpace(name))
}

// markerNames reads the markers option for p value columns: names in
// column order, or absent for marker1, marker2, ...
func markerNames(o cell.Options, p int) ([]string, error) {
	if !o.Has(cell.OptionMarkers) {
		out := make([]string, p)
		for k := range out {
			out[k] = "marker" + strconv.Itoa(k+1)
		}
		return out, nil
	}
	names := splitOption(o.Text(cell.OptionMarkers, ""))
	if len(names) != p {
		return nil, cell.WrongArgument.Errorf("the markers option names %d markers but values has %d columns; name one marker per column, e.g. markers=sbp,chol,fev1", len(names), p)
	}
	for _, n := range names {
		if strings.ContainsAny(n, "@/\\") {
			return nil, cell.WrongArgument.Errorf("the marker name %q must not hold @, / or \\", n)
		}
	}
	if err := joint.CheckMarkers(names); err != nil {
		return nil, cell.WrongArgument.Errorf("markers option: %v", err)
	}
	return names, nil
}

func splitOption(s string) []string {
	var out []string
	for _, p := range strings.Split(s, ",") {
		if p = strings.TrimSpace(p); p != "" {
			out = append(out, p)
		}
	}
	return out
}

// jointSheet is a table of exams of several markers read from ids, ages, a
// values range of p columns and groups.
type jointSheet struct {
	n, p       int
	groupGiven bool
	exams      []screening.JointExam
	rowOf      []int
	failed     map[int]*cell.Error
}

// jointExamsArgs reads ids, ages, values (p columns, or any number when p
// is 0) and groups from argument i on. A blank id or age makes its row #N/A,
// as does a row with no reading; a blank reading is a marker not measured.
func jointExamsArgs(a cell.Args, i, p int) (*jointSheet, error) {
	ids, err := a.Texts(i, cell.PolicyMissing)
	if err != nil {
		return nil, err
	}
	ages, err := a.Numbers(i+1, cell.PolicyMissing)
	if err != nil {
		return nil, err
	}
	vals, rows, cols, err := a.Matrix(i+2, cell.PolicyMissing)
	if err != nil {
		return nil, err
	}
	n := len(ids)
	if len(ages) != n || rows != n {
		return nil, cell.WrongArgument.Errorf("ids, ages and values must have the same number of rows (they have %d, %d and %d)", n, len(ages), rows)
	}
	if p > 0 && cols != p {
		return nil, cell.WrongArgument.Errorf("the model holds %d markers but values has %d columns; give one column per marker, in the model's order", p, cols)
	}
	if n == 0 {
		return nil, cell.WrongArgument.Errorf("there are no exam rows")
	}
	groups, err := groupsArg(a, i+3, n)
	if err != nil {
		return nil, err
	}
	sh := &jointSheet{n: n, p: cols, groupGiven: !a.Missing(i + 3), failed: map[int]*cell.Error{}}
	for r := range n {
		v := vals[r*cols : (r+1)*cols : (r+1)*cols]
		measured := false
		for _, x := range v {
			measured = measured || !math.IsNaN(x)
		}
		id := strings.TrimSpace(ids[r])
		switch {
		case id == "":
			sh.failed[r] = cell.BlankInput.Errorf("row %d: the worker id is blank", r+1)
		case math.IsNaN(ages[r]):
			sh.failed[r] = cell.BlankInput.Errorf("row %d: the age is blank", r+1)
		case !measured:
			sh.failed[r] = cell.BlankInput.Errorf("row %d: every reading is blank", r+1)
		default:
			sh.exams = append(sh.exams, screening.JointExam{Worker: id, Group: groups[r], Time: ages[r], Values: v})
			sh.rowOf = append(sh.rowOf, r)
		}
	}
	if len(sh.exams) == 0 {
		return nil, cell.WrongArgument.Errorf("every exam row has a blank id or age, or no reading")
	}
	return sh, nil
}

// scoreWithin scores reading v at age t of group g against a marker's
// curves, answering up to reach years outside the reference range; the
// error says why it cannot be scored.
func scoreWithin(c *refcurve.Model, g string, t, v, reach float64) error {
	if lo, hi, err := c.Range(g); err == nil {
		if err := refcurve.Outside(g, t, lo, hi, reach); err != nil {
			return err
		}
	}
	_, err := c.Z(g, t, v, reach > 0)
	return err
}

// screenable moves rows a marker cannot score to the failed rows (as the
// sheet of one marker does), naming the marker.
func (sh *jointSheet) screenable(j *screening.Joint, reach float64) error {
	kept, rowOf := sh.exams[:0], sh.rowOf[:0]
	for k, e := range sh.exams {
		r := sh.rowOf[k]
		ok := true
		for m, v := range e.Values {
			if math.IsNaN(v) {
				continue
			}
			if err := scoreWithin(j.Markers[m].Curves, e.Group, e.Time, v, reach); err != nil {
				ce := rowError(err, r+1, sh.groupGiven)
				ce.Message = j.Markers[m].Name + ", " + ce.Message
				sh.failed[r] = ce
				ok = false
				break
			}
		}
		if ok {
			kept, rowOf = append(kept, e), append(rowOf, r)
		}
	}
	sh.exams, sh.rowOf = kept, rowOf
	if len(sh.exams) == 0 {
		first := -1
		for r := range sh.failed {
			if first < 0 || r < first {
				first = r
			}
		}
		return sh.failed[first]
	}
	return nil
}

// fitJoint is VEER.FIT with a values range of several columns.
func fitJoint(ctx context.Context, env cell.Env, a cell.Args, name string) (any, error) {
	sh, err := jointExamsArgs(a, 1, 0)
	if err != nil {
		return nil, err
	}
	for r := range sh.n {
		if e, ok := sh.failed[r]; ok {
			return nil, cell.BadData.Errorf("%s; every reference row needs an id, an age and a reading", e.Message)
		}
	}
	o, err := a.Options(5)
	if err != nil {
		return nil, err
	}
	markers, err := markerNames(o, sh.p)
	if err != nil {
		return nil, err
	}
	trs := splitOption(o.Text(cell.OptionTransform, string(transform.None)))
	if len(trs) != 1 && len(trs) != sh.p {
		return nil, cell.WrongArgument.Errorf("the transform option takes one transform for every marker or one per marker (%d), got %d", sh.p, len(trs))
	}
	bw := o.Number(cell.OptionBandwidth, 0)
	if bw < 0 {
		return nil, cell.OutOfRange.Errorf("bandwidth must be positive (or 0 to choose it)")
	}
	curves := make([]refcurve.Options, len(trs))
	for k, tr := range trs {
		curves[k] = refcurve.Options{Transform: transform.Name(tr), Bandwidth: bw, MinWorkers: int(o.Number(cell.OptionMinWorkers, 0)),
			Progress: func(stage string, done float64) { env.Progress(done) }}
	}
	rows := make([]screening.JointRow, len(sh.exams))
	for i, e := range sh.exams {
		rows[i] = screening.JointRow{Worker: e.Worker, Group: e.Group, Time: e.Time, Values: e.Values}
	}
	j, err := screening.FitJoint(ctx, rows, screening.JointFitOptions{Name: name, Markers: markers, Curves: curves})
	if err != nil {
		if cerr := ctx.Err(); cerr != nil {
			return nil, cerr
		}
		return nil, cellError(err, cell.BadData)
	}
	doc, err := j.Encode()
	if err != nil {
		return nil, err
	}
	if err := checkKind(env, name, false); err != nil {
		return nil, err
	}
	return env.SaveModel(name, doc)
}

// jointSettings reads the chart options for p markers: the joint default
// chart unless chart is given; side one direction per marker (absent: up
// for each, or every direction for mewma and mcusum).
func jointSettings(o cell.Options, p int) (screening.JointSettings, error) {
	d := joint.DefaultSpec(p)
	s := screening.JointSettings{
		Chart: joint.Spec{
			Kind:      chart.Kind(o.Text(cell.OptionChart, string(d.Kind))),
			Allowance: o.Number(cell.OptionAllowance, d.Allowance),
			Lambda:    o.Number(cell.OptionLambda, d.Lambda),
			Unit:      o.Number(cell.OptionUnit, d.Unit),
			Restart:   o.Bool(cell.OptionRestart, false),
		},
		Serial: screening.Serial(o.Text(cell.OptionSerial, "")),
	}
	var err error
	if s.Extrapolate, err = reachOption(o); err != nil {
		return s, err
	}
	if o.Number(cell.OptionHeadstart, 0) != 0 {
		return s, cell.OutOfRange.Errorf("headstart is for a chart of one marker; charts of several markers start at 0")
	}
	switch {
	case o.Has(cell.OptionSide):
		for _, side := range splitOption(o.Text(cell.OptionSide, "")) {
			s.Chart.Sides = append(s.Chart.Sides, chart.Side(side))
		}
	case s.Chart.Kind != joint.MEWMA && s.Chart.Kind != joint.MCUSUM:
		s.Chart.Sides = d.Sides
	}
	if err := s.Chart.Validate(p); err != nil {
		return s, cellError(err, cell.WrongArgument)
	}
	return s, nil
}

// jointKey is the cache key of a joint chart call's settings.
func (c *chartCall) jointKey(prefix string) string {
	return fmt.Sprintf("%s:%s:%s:%d:%+v|%+v|%s|%g|%d|%d|%s", prefix, c.ref.Handle, c.ref.SHA256, c.markers,
		c.jset.Chart, c.jset.Serial, c.lim.Method, c.lim.Gap, c.lim.Seed, c.lim.Paths, c.lim.Horizon)
}

// jointCalibration is the joint model's calibration or, without a model,
// c.markers i.i.d. N(0, I) readings at the gap the options give.
func (c *chartCall) jointCalibration() (joint.Calibration, error) {
	if c.j != nil {
		cal, err := c.j.Calibration(c.jset, c.lim)
		return cal, cellError(err, cell.OutOfRange)
	}
	if c.lim.Gap <= 0 {
		return joint.Calibration{}, cell.WrongArgument.Errorf(`without a model, give the years between exams as an option, e.g. "gap=1"`)
	}
	if c.lim.Method == monitor.Bootstrap {
		return joint.Calibration{}, cell.WrongArgument.Errorf("method bootstrap needs a model (it resamples the reference workers)")
	}
	return joint.Calibration{
		Settings: joint.Settings{Chart: c.jset.Chart, Mode: monitor.Whiten, Model: joint.Independent(c.markers)},
		Method:   monitor.Normal, Gap: c.lim.Gap, Seed: c.lim.Seed, Paths: c.lim.Paths, Progress: c.lim.Progress, Stop: c.lim.Stop,
	}, nil
}

// jointLimit computes the joint limit for target years, once per input.
func (c *chartCall) jointLimit(target float64) (monitor.LimitResult, error) {
	v, err := c.env.Once(c.jointKey("veer.jlimit")+":"+strconv.FormatFloat(target, 'g', -1, 64), func() (any, error) {
		cal, err := c.jointCalibration()
		if err != nil {
			return nil, err
		}
		r, err := joint.Limit(cal, target)
		if err != nil {
			return nil, cellError(err, cell.OutOfRange)
		}
		return r, nil
	})
	if err != nil {
		return monitor.LimitResult{}, err
	}
	return v.(monitor.LimitResult), nil
}

// jointDelay computes a joint delay, once per input.
func (c *chartCall) jointDelay(h float64, shift []float64, onset float64) (float64, error) {
	return onceFloat(c.env, c.jointKey("veer.jdelay")+fmt.Sprintf(":%g:%v:%g", h, shift, onset), func() (float64, error) {
		cal, err := c.jointCalibration()
		if err != nil {
			return 0, err
		}
		d, err := joint.Delay(cal, h, shift, onset)
		if err != nil {
			return 0, cellError(err, cell.OutOfRange)
		}
		return d.Years, nil
	})
}

// callJointChart is VEER.CHART with a model of several markers: it spills
// per row each marker's z, then the joint chart, limit, signal, the marker
// leading a signal, and the first signal's age.
func callJointChart(ctx context.Context, c *chartCall, a cell.Args) (any, error) {
	p := len(c.j.Markers)
	sh, err := jointExamsArgs(a, chartLayout.exams, p)
	if err != nil {
		return nil, err
	}
	h, err := c.resolveLimit()
	if err != nil {
		return nil, err
	}
	if err := sh.screenable(c.j, c.jset.Extrapolate); err != nil {
		return nil, err
	}
	res, err := c.j.Screen(sh.exams, c.jset, h)
	if err != nil {
		return nil, cellError(err, cell.BadData)
	}
	width := p + 5
	out := make([][]any, sh.n)
	for r, e := range sh.failed {
		row := make([]any, width)
		for k := range row {
			row[k] = e
		}
		out[r] = row
	}
	for k, r := range res {
		row := make([]any, 0, width)
		for m := range p {
			if math.IsNaN(r.Z[m]) {
				row = append(row, nil)
			} else {
				row = append(row, r.Z[m])
			}
		}
		var lead, fs any = "", nil
		if r.Leading >= 0 {
			lead = c.j.Markers[r.Leading].Name
		}
		if !math.IsNaN(r.FirstSignal) {
			fs = r.FirstSignal
		}
		out[sh.rowOf[k]] = append(row, r.Stat, h, r.Signal, lead, fs)
	}
	return out, nil
}

// jointInfo lists a model of several markers: its markers and their
// correlations, then each marker's own items prefixed by its name.
func jointInfo(j *screening.Joint, ref cell.ModelRef) [][]any {
	out := [][]any{{"handle", ref.Handle}, {"model", j.Name}, {"markers", strings.Join(j.MarkerNames(), ", ")}, {"mean gap (years)", j.MeanGap}}
	for _, c := range []struct {
		what string
		r    joint.Correlation
	}{{"readings", j.Model.Reading}, {"innovations", j.Model.Innovation}} {
		for a := range c.r.R {
			for b := a + 1; b < len(c.r.R); b++ {
				pair := j.Model.Markers[a] + "-" + j.Model.Markers[b]
				out = append(out, []any{"correlation of the " + c.what + " " + pair, c.r.R[a][b]},
					[]any{"standard error, " + c.what + " " + pair, c.r.SE[a][b]})
			}
		}
	}
	for _, m := range j.Markers {
		for _, it := range m.Items() {
			if it.Name == "model" {
				continue
			}
			out = append(out, []any{m.Name + ": " + it.Name, it.Value})
		}
	}
	return out
}

// jointChartCall reads the model and options of VEER.CHART when the model
// holds several markers (ok false otherwise, nothing read but the model).
func jointChartCall(ctx context.Context, env cell.Env, a cell.Args, at sheetLayout) (*chartCall, bool, error) {
	c := &chartCall{env: env}
	if err := c.readModel(ctx, a, at.model); err != nil {
		return nil, false, err
	}
	if c.j == nil {
		return nil, false, nil
	}
	if err := c.readOptions(ctx, a, at.options); err != nil {
		return nil, true, err
	}
	return c, true, nil
}

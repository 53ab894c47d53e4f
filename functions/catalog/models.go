// Models: reading a model a cell names, fitting (VEER.FIT), diagnostics
// (VEER.INFO) and the list (VEER.MODELS).

package catalog

import (
	"context"
	"errors"
	"fmt"
	"strings"

	"veer/functions/cell"
	"veer/functions/refcurve"
	"veer/functions/screening"
	"veer/functions/transform"
)

// loadModel returns the decoded model of one marker a cell names, decoding
// each stored version once; "name/marker" is one marker of a model of
// several.
func loadModel(env cell.Env, name string) (*screening.Model, cell.ModelRef, error) {
	m, j, ref, err := loadAny(env, name)
	if err != nil {
		return nil, ref, err
	}
	if j != nil {
		return nil, ref, cell.WrongArgument.Errorf("model %s holds several markers (%s); here give one of them as %s/%s, or use it with VEER.CHART, VEER.LIMIT or VEER.DELAY",
			ref.Handle, strings.Join(j.MarkerNames(), ", "), ref.Name, j.MarkerNames()[0])
	}
	return m, ref, nil
}

func modelArg(ctx context.Context, env cell.Env, a cell.Args, i int) (*screening.Model, cell.ModelRef, error) {
	name, err := a.Text(i)
	if err != nil {
		return nil, cell.ModelRef{}, err
	}
	if strings.TrimSpace(name) == "" {
		return nil, cell.ModelRef{}, cell.WrongArgument.Errorf("the model name (argument %s) is empty", a.Func().ArgName(i))
	}
	return loadModel(env, strings.TrimSpace(name))
}

// checkKind refuses to save a model under the name of a rule set or a rule
// set under the name of a model. A name keeps the kind of its first
// version; reading that exact version (not the bare name) keeps the call's
// result valid in the server's cache after the save.
func checkKind(env cell.Env, name string, ruleSet bool) error {
	ref, err := env.Model(name + "@v1")
	if err != nil || isRuleSet(ref.Doc) == ruleSet {
		return nil
	}
	if ruleSet {
		return cell.WrongArgument.Errorf("%s is the name of a model fitted with VEER.FIT; give the rule set another name", ref.Name)
	}
	return cell.WrongArgument.Errorf("%s is the name of a rule set saved with VEER.SAVERULES; give the model another name", ref.Name)
}

// checkName checks the name of a model or rule set to save.
func checkName(what, name string) (string, error) {
	name = strings.TrimSpace(name)
	if name == "" || strings.ContainsAny(name, "@/\\") {
		return "", cell.WrongArgument.Errorf("the %s name must be non-empty text without @, / or \\", what)
	}
	return name, nil
}

func callFit(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	name, err := a.Text(0)
	if err != nil {
		return nil, err
	}
	if name, err = checkName("model", name); err != nil {
		return nil, err
	}
	if _, _, cols, _ := a.Matrix(3, cell.PolicyMissing); cols > 1 {
		return fitJoint(ctx, env, a, name)
	}
	sh, err := examsArgs(a, 1)
	if err != nil {
		return nil, err
	}
	if len(sh.failed) > 0 {
		return nil, cell.BadData.Errorf("%s; every reference row needs an id, an age and a reading", sh.failedList())
	}
	o, err := a.Options(5)
	if err != nil {
		return nil, err
	}
	rows := make([]refcurve.Row, len(sh.exams))
	for i, e := range sh.exams {
		rows[i] = refcurve.Row{Worker: e.Worker, Group: e.Group, Time: e.Time, Value: e.Value}
	}
	opt := screening.FitOptions{Name: name, Curves: refcurve.Options{
		Transform:  transform.Name(o.Text(cell.OptionTransform, string(transform.None))),
		Bandwidth:  o.Number(cell.OptionBandwidth, 0),
		MinWorkers: int(o.Number(cell.OptionMinWorkers, 0)),
		Progress:   func(stage string, done float64) { env.Progress(done) },
	}}
	if opt.Curves.Bandwidth < 0 {
		return nil, cell.OutOfRange.Errorf("bandwidth must be positive (or 0 to choose it)")
	}
	m, err := screening.Fit(ctx, rows, opt)
	if err != nil {
		if cerr := ctx.Err(); cerr != nil {
			return nil, cerr
		}
		return nil, fitError(err)
	}
	doc, err := m.Encode()
	if err != nil {
		return nil, err
	}
	if err := checkKind(env, name, false); err != nil {
		return nil, err
	}
	return env.SaveModel(name, doc)
}

// fitError words a failed fit for a cell: every problem found (the first
// few), a group too small naming the minworkers option.
func fitError(err error) error {
	var all *refcurve.RowErrors
	if !errors.As(err, &all) {
		return cellError(fitHint(err), cell.BadData)
	}
	parts := make([]string, 0, maxListed+1)
	for i, e := range all.List {
		if i == maxListed {
			parts = append(parts, fmt.Sprintf("and %d more", all.Count-maxListed))
			break
		}
		parts = append(parts, fitHint(e).Error())
	}
	return failureOf(err, cell.BadData).Errorf("%s", strings.Join(parts, "; "))
}

// fitHint adds to a group too small for a curve the option that lowers
// the minimum.
func fitHint(err error) error {
	var ge *refcurve.GroupSizeError
	if errors.As(err, &ge) {
		return fmt.Errorf(`%w (option "minworkers=N" lowers the minimum, down to %d; curves from fewer workers are less certain)`, err, refcurve.LeastMinWorkers)
	}
	return err
}

func callInfo(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	m, j, ref, err := anyModelArg(env, a, 0)
	if err != nil {
		return nil, err
	}
	if j != nil {
		return jointInfo(j, ref), nil
	}
	items := m.Items()
	out := make([][]any, 0, len(items)+1)
	out = append(out, []any{"handle", ref.Handle})
	for _, it := range items {
		out = append(out, []any{it.Name, it.Value})
	}
	return out, nil
}

// ModelLister is implemented by a cell.Env that can list the names of the
// models it holds (cell.MemoryEnv does). VEER.MODELS needs it.
type ModelLister interface {
	// Names returns the names of the models held, sorted.
	Names() []string
}

func callModels(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	l, ok := env.(ModelLister)
	if !ok {
		return nil, cell.WrongArgument.Errorf("this server cannot list its models; GET /v1/models lists them")
	}
	out := [][]any{{"name", "handle", "versions", "groups", "exams"}}
	for _, name := range l.Names() {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		ref, err := env.Model(name)
		if err != nil {
			continue // deleted meanwhile
		}
		if isRuleSet(ref.Doc) {
			out = append(out, []any{ref.Name, ref.Handle, ref.Version, "rule set", nil})
			continue
		}
		m, j, _, err := loadAny(env, ref.Handle)
		if err != nil {
			out = append(out, []any{ref.Name, ref.Handle, ref.Version, cell.AsError(err), nil})
			continue
		}
		if j != nil {
			out = append(out, []any{ref.Name, ref.Handle, ref.Version, "markers " + strings.Join(j.MarkerNames(), ", "), j.Markers[0].Curves.Rows})
			continue
		}
		var rows any
		if m.Curves != nil {
			rows = m.Curves.Rows
		}
		out = append(out, []any{ref.Name, ref.Handle, ref.Version, strings.Join(m.Reference().Groups(), ", "), rows})
	}
	return out, nil
}

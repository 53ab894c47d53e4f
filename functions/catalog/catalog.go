// The function table: every VEER.* function of this package with its
// parameters, options and help.

package catalog

import (
	"veer/functions/cell"
	"veer/functions/rules"
	"veer/functions/screening"
)

const caution = " " + screening.Caution

// Option names used by this catalogue beyond cell's shared ones.
var chartOptions = []string{
	cell.OptionTarget, cell.OptionLimit, cell.OptionChart, cell.OptionSide, cell.OptionAllowance,
	cell.OptionLambda, cell.OptionUnit, cell.OptionHeadstart, cell.OptionRestart, cell.OptionSerial,
	cell.OptionMethod, cell.OptionGap, cell.OptionSeed, cell.OptionReps, cell.OptionExtrapolate, cell.OptionReach, cell.OptionHorizon,
	cell.OptionMarkers,
}

// New returns the catalogue of veer's cell functions.
func New() *cell.Catalogue {
	cache := rules.NewCache(rules.DefaultCacheSize, rules.DefaultLimits())
	all := append(funcs(), ruleFuncs(cache)...)
	all = append(all, evaluateFunc(cache))
	return cell.NewCatalogue(all...)
}

func modelParam() cell.Param {
	return cell.Param{Name: "model", Type: cell.TypeText, Help: `model name ("sbp": its latest version, updated when refitted) or handle ("sbp@v2": that exact version)`}
}

func funcs() []cell.Func {
	return []cell.Func{
		{
			Name:    "VEER.FIT",
			Summary: "Fits a reference model from healthy workers' exams and returns its handle.",
			Help:    "Fits mean and SD curves over age per group, and the serial correlation of each worker's readings, from rows of workers known to be healthy. The handle (name@vN) changes when the data change and stays the same when they do not. Every row needs an id, an age and a reading: a blank one is an error naming the row. A values range of several columns fits one model of several markers measured at the same exams (each its own curves and transform, and their correlations), used by VEER.CHART, VEER.LIMIT and VEER.DELAY to chart them together; its marker m is the model name/m in the lookups. A name is either a model or a rule set (VEER.SAVERULES), never both.",
			Params: []cell.Param{
				{Name: "name", Type: cell.TypeText, Help: "name of the model, e.g. sbp"},
				{Name: "ids", Type: cell.TypeRange, Help: "worker ids, one per exam"},
				{Name: "ages", Type: cell.TypeRange, Help: "age at each exam, in years"},
				{Name: "values", Type: cell.TypeRange, Help: "the marker's reading at each exam; for several markers fitted together one column per marker (a blank cell: not measured at that exam), named with the markers option"},
				{Name: "groups", Type: cell.TypeRange, Optional: true, Help: "reference group per exam (e.g. sex or job group)"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: `options as "name=value; ..." text or a two-column range`},
			},
			Options: []string{cell.OptionTransform, cell.OptionBandwidth, cell.OptionMinWorkers, cell.OptionMarkers},
			Result:  cell.ShapeValue, Writes: true, Slow: true,
			Call: callFit,
		},
		{
			Name:    "VEER.MODELS",
			Summary: "Lists the stored models and rule sets.",
			Help:    "A header row, then one row per name: name, latest handle, number of versions, groups (\"rule set\" for a rule set saved with VEER.SAVERULES) and exams fitted.",
			Result:  cell.ShapeTable, Streaming: true,
			Call: callModels,
		},
		{
			Name:    "VEER.INFO",
			Summary: "Diagnostics of a reference model as item and value rows.",
			Help:    "Workers and exams per group, age range, bandwidths, band coverage, normality check, serial correlation and its checks, mean gap between exams.",
			Params:  []cell.Param{modelParam()},
			Result:  cell.ShapeTable, Streaming: true,
			Call: callInfo,
		},
		{
			Name:    "VEER.REFMEAN",
			Summary: "Reference mean at an age (on the model's scale).",
			Help: "The mean curve of healthy workers of the group at each age. For a model fitted with a log or Box-Cox transform the mean is on the transformed scale; use VEER.CENTILE with 50 for the median in the reading's own unit. For a model on a published reference (an LMS table or reference equations) it is the median M. " +
				cell.RowHelp(lookupFailures...),
			Params: append([]cell.Param{modelParam(),
				{Name: "ages", Type: cell.TypeRange, Help: "age or ages in years"},
			}, lookupParams("group or groups (needed when the model has several)")...),
			Options: lookupOptions, Result: cell.ShapeColumn, Streaming: true,
			Call: callMean,
		},
		{
			Name:    "VEER.REFSD",
			Summary: "Reference standard deviation at an age (on the model's scale).",
			Help:    "The SD curve of healthy workers of the group at each age; for a model on a published reference, M·S (the SD of a reading near the median). " + cell.RowHelp(lookupFailures...),
			Params: append([]cell.Param{modelParam(),
				{Name: "ages", Type: cell.TypeRange, Help: "age or ages in years"},
			}, lookupParams("group or groups")...),
			Options: lookupOptions, Result: cell.ShapeColumn, Streaming: true,
			Call: callSD,
		},
		{
			Name:    "VEER.CENTILE",
			Summary: "Reference centile at an age, in the reading's own unit.",
			Help:    "The reading below which p percent of healthy workers of the group fall at that age. " + cell.RowHelp(append(lookupFailures, cell.OutOfDomain)...),
			Params: append([]cell.Param{modelParam(),
				{Name: "ages", Type: cell.TypeRange, Help: "age or ages in years"},
				{Name: "p", Type: cell.TypeNumber, Help: "centile in percent, between 0 and 100, e.g. 97.5"},
			}, lookupParams("group or groups")...),
			Options: lookupOptions, Result: cell.ShapeColumn, Streaming: true,
			Call: callCentile,
		},
		{
			Name:    "VEER.ZSCORE",
			Summary: "Standardised score of a reading against healthy workers of the same age.",
			Help: "z = (reading − reference mean) / reference SD at the worker's age, on the model's scale; for a model on a published reference, the LMS deviate ((reading/M)^L − 1)/(L·S). " +
				cell.RowHelp(append(lookupFailures, cell.OutOfDomain)...) + " " + cell.CallHelp(cell.WrongArgument),
			Params: append([]cell.Param{modelParam(),
				{Name: "ages", Type: cell.TypeRange, Help: "age or ages in years"},
				{Name: "values", Type: cell.TypeRange, Help: "reading or readings"},
			}, lookupParams("group or groups")...),
			Options: lookupOptions, Result: cell.ShapeColumn, Streaming: true,
			Call: callZ,
		},
		{
			Name:    "VEER.CHART",
			Summary: "Chart statistic over a whole sheet of exams: z, innovation, chart, limit, signal, first signal.",
			Help: "Give every exam row (any order); each worker's exams are ordered by age inside. Spills one row per input row with columns z, innovation, chart, limit, signal, first_signal; with a model of several markers, each marker's z (blank where not measured), then the joint chart, limit, signal, the marker leading a signal and first_signal. Options must give target (years to a false signal) or limit. " +
				sheetHelp + caution,
			Params: []cell.Param{modelParam(),
				{Name: "ids", Type: cell.TypeRange, Help: "worker ids, one per exam"},
				{Name: "ages", Type: cell.TypeRange, Help: "age at each exam, in years"},
				{Name: "values", Type: cell.TypeRange, Help: "the reading at each exam; with a model of several markers one column per marker in the model's order"},
				{Name: "groups", Type: cell.TypeRange, Optional: true, Help: "group per exam"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: `e.g. "target=20; side=up; allowance=0.5" (several markers: "target=20; side=up,up,down")`},
				covariatesParam()},
			Options: chartOptions, Result: cell.ShapeTable, Streaming: true, Slow: true,
			Call: callChart,
		},
		{
			Name:    "VEER.LIMIT",
			Summary: "Control limit for a target average time to a false signal.",
			Help:    "The limit h such that a healthy worker is flagged on average once in target years. Without a model, independent N(0,1) scores at the gap given by the gap option are assumed (markers=3: three markers charted together). With a model of several markers, the limit of their joint chart.",
			Params: []cell.Param{
				{Name: "target", Type: cell.TypeNumber, Help: "average years to a false signal for a healthy worker, e.g. 20"},
				{Name: "model", Type: cell.TypeText, Optional: true, Help: "model name or handle (for its serial correlation and exam gaps)"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: `e.g. "chart=cusum; allowance=0.5; side=up; method=normal"`}},
			Options: chartOptions, Result: cell.ShapeValue, Streaming: true, Slow: true,
			Call: callLimit,
		},
		{
			Name:    "VEER.DELAY",
			Summary: "Expected years from the start of a sustained shift to a signal.",
			Help:    "A shift of the readings by the given number of reference SDs (negative for downward) starts at the first exam (or onset years later); the answer is the expected years until the chart signals. Options give target or limit.",
			Params: []cell.Param{
				{Name: "shift", Type: cell.TypeRange, Help: "shift in reference SDs, e.g. 1; for several markers one per marker, e.g. a row 0.5, 0.5, 0"},
				{Name: "model", Type: cell.TypeText, Optional: true, Help: "model name or handle"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: `e.g. "target=20; onset=5"`}},
			Options: append(append([]string{}, chartOptions...), cell.OptionOnset), Result: cell.ShapeValue, Streaming: true, Slow: true,
			Call: callDelay,
		},
	}
}

// Package rules compiles and evaluates alert rules written in CEL, the
// Common Expression Language (github.com/google/cel-go), so that analysts
// can write their own screening rules, such as "chart over its limit, or a
// single reading above the 99th centile for workers with at least two
// exams in the last five years", without writing code.
//
// A rule flags an exam for review. A signal prompts review by a licensed
// clinician under local occupational-health rules; it is not a diagnosis.
//
// # Writing rules
//
// A rule is one CEL expression. It gives true/false (an alert), text (for
// example a severity label) or a number; the caller states which it wants
// and the kind is checked when the rule is compiled. Examples:
//
//	chart > limit
//	centile > 99.0 && times.count(t, t >= time - 5.0) >= 2
//	last(zs, 4).count(v, v > 2.0) >= 3
//	chart > limit ? "high" : (z > 2.0 ? "watch" : "none")
//	has_previous && (value - prev_value) / gap > 10.0
//
// Whole numbers and decimal numbers compare freely (z > 2 works), but
// arithmetic does not mix them: write value * 2.0, not value * 2.
//
// # Exam variables
//
// Per exam (names are snake_case; Exam holds the Go fields):
//
//	value                     number        the reading, in its own units
//	time                      number        age at the exam, in years
//	group                     text          reference group (sex, job group, ...); "" if none
//	worker                    text          worker identifier
//	z                         number        standardised reading (value - mean) / sd
//	mean, sd                  number        reference mean and standard deviation at this age and group
//	centile                   number        the reading's centile in the reference, 0 to 100
//	innovation                number        the charted residual for this exam
//	chart_up, chart_down      number        upward and downward chart statistics; 0 for a side not watched
//	chart                     number        the statistic compared with the limit: the larger of the two
//	limit                     number        the chart's control limit
//	signal                    true/false    the chart signals at this exam
//	in_range                  true/false    the age lies inside the reference data's age range
//	exam                      whole number  1 for the worker's first exam, 2 for the second, ... (time order)
//	exams                     whole number  number of the worker's exams in the data (exam == exams on the latest)
//	has_previous              true/false    from the second exam on (same as exam > 1)
//	gap                       number        years since the previous exam; 0 on the first exam
//	prev_z, prev_value        number        z and value at the previous exam; NaN on the first exam
//	has_signalled             true/false    the chart signalled at this exam or an earlier one
//	years_since_first_signal  number        years from the first signal to this exam; NaN if none yet
//
// History of the worker up to and including this exam, oldest first:
//
//	zs, values, times         list of numbers
//	signals                   list of true/false
//
// "Not available" is NaN, and every comparison with NaN is false, so
// `z - prev_z > 1.0` is false on a first exam and
// `years_since_first_signal < 2.0` is false for a worker who never
// signalled. Test availability with has_previous, has_signalled or
// missing(x).
//
// Link fills exam, exams, gap, prev_z, prev_value,
// years_since_first_signal and the history lists from a whole sheet of
// exams; the other fields come from the reference model and the chart.
//
// # Functions
//
// Standard CEL (comparisons, arithmetic, && || !, c ? a : b, size,
// contains, startsWith, endsWith, matches, int, double, string, and the
// list macros all, exists, exists_one, filter, map) plus these, and
// nothing else:
//
//	last(list, n)             the last n items (all if fewer), e.g. last(zs, 4)
//	list.count(v, condition)  how many items meet the condition, e.g. zs.count(v, v > 2.0)
//	abs(x)                    absolute value
//	min(list), max(list)      smallest / largest number of a list (error if empty)
//	mean(list)                average of a list of numbers (error if empty)
//	missing(x)                true when x is not available (NaN)
//
// A rule cannot read files, the environment, the clock or the network:
// no such function exists in its environment.
//
// # Rules over plain columns
//
// CompileColumns evaluates a rule over any table whose columns are named
// by a header row. Headers become identifiers by SanitizeName: accents
// dropped, lower case, other characters to "_", a leading digit prefixed
// with "col_", a CEL reserved word suffixed with "_", repeats numbered
// _2, _3 (SanitizeNames): "Systolic BP" is systolic_bp, "FEV1 (L)" is
// fev1_l, "% predicted" is pct_predicted.
//
// # Safety
//
// Each rule is bounded by Limits: its length (4,000 characters by
// default), a CEL cost limit per evaluation (100,000 units: roughly one
// per variable read, comparison or loop step) and a time limit per
// evaluation (250 ms). A rule whose worst case provably fits the cost limit
// for the exam at hand runs without tracking (see cost.go); any other runs
// with cel.CostLimit and a context checked inside loops, so a runaway rule
// (a loop inside a loop over a long history) stops with an error saying
// so.
//
// # Errors
//
// Compile errors (*CompileError) give the line and column of the mistake
// with a caret excerpt, an unknown name with the closest known names, and
// the kind expected against the kind given ("this rule must give
// true/false, but it gives a number"). Evaluation errors (*EvalError,
// *RowErrors) name the row and worker.
//
// Unknown names and functions are found in the parsed expression, at the
// nodes cel-go's type checker reports (diagnose.go); the closest known
// names by edit distance (suggest.go). What only cel-go's message text
// says (the kinds in a failed check, syntax errors, evaluation errors) is
// reworded by patterns written against one cel-go release (messages.go,
// celGoVersion), which a test checks against cel-go itself.
//
// # Compiling once
//
// Cache compiles each text once (keyed by text, wanted kind and, for
// column rules, the columns), keeps a bounded number of rules, and counts
// its compilations.
//
// # Rule sets
//
// RuleSet is a named collection of rules with optional severity labels,
// read by ParseRuleSet from a small text format (name [severity] =
// expression, # comments) or JSON.
package rules

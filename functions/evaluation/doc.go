// Package evaluation measures how a screening method would have done on a
// labelled history: exams of workers some of whom were later diagnosed
// with the condition screened for. It answers the question an analyst or
// an officer asks of their own past data before adopting a rule or a
// false-alarm target: had we used this, whom would it have flagged, how
// long before the diagnosis, and how many healthy workers would it have
// bothered? It is in the spirit of the process-monitoring evaluations of
// Qiu, P., Xia, Z. and You, L. (2020), "Process monitoring ROC curve for
// evaluating dynamic screening methods", Technometrics 62(2), 236–248
// (details recalled from memory), with figures of our own defined below.
//
// A method is anything that flags exams: a chart at a target, an alert
// rule, the cross-sectional rule "a reading beyond the reference centile
// p". The package sees only its flags, one per exam, so every method is
// scored by the same code. NewCohort checks the exams and the outcomes
// table once; Cohort.Evaluate then scores one method's flags.
//
// # Definitions
//
// Each worker of the exam table has an outcome: diagnosed at age a, or
// never diagnosed (up to the end of their records).
//
// Screening exams. Exams at or after the age at diagnosis are left out
// (counted in Summary.AfterDiagnosis): they follow a known condition and
// are not screening, and a flag there is neither a detection nor a false
// signal. An exam at exactly the age at diagnosis is left out too: a flag
// at the diagnosing exam gives no lead. A worker diagnosed at their first
// exam has no screening exam and is left out of every figure (counted in
// Summary.AtFirstExam). All exams of a worker never diagnosed are
// screening exams. For each worker, s is the age at the method's first
// flagged screening exam (none if no screening exam is flagged).
//
// Detection, over the D diagnosed workers with a screening exam: K of them
// have an s (flagged before the diagnosis); the share K/D is given with
// its Wilson (1927) 95% interval (see Wilson).
//
// Lead time, over the same D workers: a flagged worker's lead is a − s
// years, always > 0. The distribution over all D workers, not only the K
// flagged, is the Kaplan–Meier estimate (see KaplanMeier) of
// Y = s − a (the age of the first signal relative to the diagnosis), with
// a worker never flagged before the diagnosis censored at Y = 0: all that
// is known of them is that no signal came before the diagnosis, which
// ended their screening. Because the censoring time 0 is later than every
// signal, the estimate reduces to counting: 1 − S(−ℓ) is the share of the
// D workers flagged at least ℓ years before their diagnosis (Lead.FlaggedBy),
// and 1 − S(0) = K/D. The median lead is −Q(0.5) and the quartiles
// −Q(0.75) and −Q(0.25), Q the quantile of Y by R's survival rule (see
// Curve.Quantile); they are "not reached" (NaN) when fewer than a half,
// three quarters or a quarter of the D workers were flagged at all. So a
// method that catches only the easy cases cannot look quick: a worker
// never flagged counts as having less lead than any flagged one.
// Lead.MedianFlagged is the ordinary median among the K flagged alone, for
// plain-words summaries that say "K were flagged a median of Y years
// before the diagnosis". Leads are bounded by each worker's screening
// history: a worker examined for two years before the diagnosis cannot be
// flagged three years before it.
//
// False signals, over the H workers never diagnosed: a worker's first
// signal is a false signal; after it the worker is taken to be reviewed,
// so later signals are not counted again. Each is at risk from the first
// exam to the first signal, or to the last exam when never flagged; the
// rate is 100·F/Σ(years at risk) false signals per 100 worker-years, F the
// number flagged, with its exact Poisson 95% interval (Garwood 1936, see
// PoissonRate). This is what a limit's target counts (worker-years of exams
// per false signal across workers followed as the reference workers were,
// the chart starting afresh for each), so a chart calibrated for a target
// of T years should give about 100/T. The share of the H workers flagged at
// least once over their whole follow-up, F/H, is given with its Wilson
// interval; it grows with follow-up, which differs between workforces, so
// Result.FlaggedWithin gives the Kaplan–Meier share flagged within a fixed
// number of years of the first exam (years to the first signal, censored
// at the last exam).
//
// Outcomes. ParseDiagnosed reads the diagnosis flag. A diagnosed worker
// needs an age at diagnosis no earlier than their first exam; a worker
// never diagnosed must have it blank. Every worker of the exam table needs
// one outcome row, unless Options.MissingAsHealthy treats those without
// one as never diagnosed. The errors are typed (see OutcomeError and the
// sentinel errors) and name the row and the column.
//
// The package is pure: no I/O, no globals; loops that input can lengthen
// check for cancellation and input sizes are capped (MaxRows). A signal is
// a prompt for review by a licensed clinician under local
// occupational-health rules, not a diagnosis, and these figures describe a
// screening aid, not diagnostic accuracy.
package evaluation

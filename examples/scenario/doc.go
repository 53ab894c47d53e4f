// Package scenario generates veer's demo data: a fictional employer, its
// screened workforce, a healthy reference cohort and the truth about which
// workers drift, from a documented model and a seed.
//
// The package is pure: it does no I/O, keeps no package-level mutable state,
// and the same Config (including Config.Seed) always gives the same exams,
// byte for byte once encoded with EncodeExams and EncodeTruth.
//
// # The scenario
//
// Morvandel Offshore Rotorworks is an invented company that maintains
// offshore wind turbines. Its occupational-health officer screens two crews:
//
//   - group "tower": the tower crew, technicians who climb turbine towers and
//     work in nacelles and on blades;
//   - group "workshop": the workshop crew, who repair gearboxes and blades in
//     the onshore workshop.
//
// Each worker has irregular periodic, pre-placement and ad-hoc exams
// measuring two markers: systolic blood pressure (SBP, mmHg) and forced
// expiratory volume in one second (FEV1, litres). The reference cohort
// (ids R00001, R00002, ...) are workers known to be healthy at every exam;
// the workforce (ids W00001, W00002, ...) are the workers being screened,
// about 15% of whom start drifting in each marker at a known onset age. The
// company, crews, workers and values are all synthetic.
//
// # Generating model
//
// Ages t are in years, 20 <= t <= 65, and u = t - 40.
//
// Healthy reference curves (Curve returns them), on each marker's model
// scale: SBP in mmHg, FEV1 as ln(litres):
//
//	SBP   tower:    mean  121 + 0.45 u + 0.006 u²           sd  11 + 0.12 u
//	SBP   workshop: mean  124 + 0.50 u + 0.006 u²           sd  12 + 0.12 u
//	FEV1  tower:    mean  ln(4.05 - 0.030 u - 0.0004 u²)    sd  0.12 + 0.0012 u
//	FEV1  workshop: mean  ln(3.80 - 0.028 u - 0.0004 u²)    sd  0.13 + 0.0012 u
//
// so SBP rises with age and FEV1 falls with age; FEV1 in litres is
// log-normal (median exp(mean), mildly right-skewed, skewness about 3 sd ≈ 0.4).
//
// A reading is
//
//	SBP  = mean_g(t) + sd_g(t)·(e₁(t) + δ₁(t))            rounded to 1 mmHg
//	FEV1 = exp(mean_g(t) + sd_g(t)·(e₂(t) + δ₂(t)))       rounded to 0.01 L
//
// where e_k is the standardised residual and δ_k the drift (zero for healthy
// workers). Within a worker the residual follows the model veer fits:
//
//	e(t) = √c·s(t) + √(1-c)·w(t),   corr(s(t), s(t+d)) = φ^d,
//
// s a stationary continuous-time AR(1) with unit variance, sampled exactly at
// the exam gaps d (s_j = φ^d s_{j-1} + √(1-φ^{2d}) z_j, as in Jones &
// Boadi-Boateng 1991, "Unequally spaced longitudinal data with AR(1) serial
// correlation", Biometrics 47:161-175), w independent N(0,1) measurement
// noise. Defaults: φ = 0.95 per year for both markers, c = 0.70 for SBP and
// c = 0.85 for FEV1, so two readings of a healthy worker one year apart
// correlate 0.67 (SBP) and 0.81 (FEV1), ten years apart 0.42 and 0.51: each
// worker has a stable personal level that wanders slowly, and single
// readings scatter around it — more for blood pressure (visit-to-visit
// variability) than for spirometry. The two markers' innovations z and
// noises w are correlated with ρ = -0.2, so corr(e₁(t), e₂(t)) =
// ρ·(√(c₁c₂) + √((1-c₁)(1-c₂))) ≈ 0.98ρ.
//
// Drift of an affected worker with onset age T₀, rate β (SD per year) and
// plateau A (SD, same sign as β):
//
//	δ(t) = 0                                   t <= T₀
//	δ(t) = sign(A)·min(|β|·(t - T₀), |A|)      t >  T₀
//
// a sustained shift that grows for |A/β| years and then stays. |A| ~
// U(1.0, 1.5) SD and the growth lasts U(2, 4) years (so |β| is 0.25 to
// 0.75 SD per year); SBP drifts upward, FEV1 (on the ln scale) downward.
// Each workforce worker is affected in each marker independently with
// probability Config.AffectedShare (default 0.15); T₀ = first + U(0.2,
// 0.5)·(last - first) of that worker's exam ages, so every onset falls
// inside the follow-up, after some healthy exams and with at least half of
// the follow-up still to come.
//
// Exam schedule, per worker: group "tower" with probability 0.55 (reference)
// or 0.60 (workforce); first exam at age U(20, 57); planned follow-up
// U(5, 15) years, cut at age 65; gaps between exams drawn from a mixture —
// 75% periodic U(0.8, 1.5) yr, 15% missed visits U(2, 4) yr, 10% ad-hoc
// visits U(0.1, 0.5) yr (mean gap ≈ 1.34 yr); at least 3 exams per worker.
// Ages are rounded to 0.01 yr before the readings are computed.
//
// Outcomes: what the records say was later diagnosed, the labelled history
// veer evaluate scores methods on. A drifting marker's condition (raised
// blood pressure for SBP, airflow obstruction for FEV1) is diagnosed with
// probability Config.DiagnosedShare (default 0.7) at onset + U(2, 6) years;
// a worker who does not drift in a marker is diagnosed with it all the same
// with probability Config.OtherDiagnosedShare (default 0.02), at an age
// uniform over their exams (a case the marker cannot show). A diagnosis
// more than a year after the worker's last exam is not on record. So, as in
// real records, some drifting workers are never diagnosed and count among
// the healthy, and a few diagnosed workers never drift.
//
// Every worker draws from its own PCG stream (seeded by Config.Seed and the
// worker's cohort and number), so changing the size of one cohort never
// changes the workers already generated.
//
// Screening is an aid: a signal on these data, as on real data, prompts
// review by a licensed clinician under local occupational-health rules; it
// is not a diagnosis.
package scenario

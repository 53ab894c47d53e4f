// Package joint screens several markers of a worker together — blood
// pressure, cholesterol and lung function measured at the same exams — so
// that a drift modest in each of two markers can be seen when they are
// read together, at one false-signal rate for all of them. It is the
// multivariate dynamic screening of Qiu & Xiang (2015, "Surveillance of
// cardiovascular diseases using a multivariate dynamic screening system",
// Statistics in Medicine 34), built on packages serial, chart and limit. A
// signal prompts review by a licensed clinician under local
// occupational-health rules; it is not a diagnosis.
//
// # Model
//
// Each marker m has its own reference curves (so its own transform) and
// its own serial model (package serial), giving standardised readings z_m
// and Kalman innovations u_m, i.i.d. N(0,1) over a healthy worker's exams.
// Across markers, Model holds the correlation at the same exam of the
// readings (Reading) and of the innovations (Innovation), estimated from
// the reference workers pair by pair over the exams where both were
// measured (Correlate: pairwise-complete Pearson correlation with a
// worker-level sandwich standard error from the influence function of r,
// Devlin, Gnanadesikan & Kettenring 1975). A marker missing at some exams
// is normal: its own filter runs over the exams where it was measured
// (Model.Innovations), and the chart uses what is there. A correlation
// matrix that is not positive definite — two markers carrying the same
// information — is an error naming them (CorrelationError).
//
// As a generating model (limits by method normal), a healthy worker's
// innovation vectors are independent from exam to exam and N(0, R[M,M])
// over the markers M measured at an exam, R = Innovation.R, and each
// marker's innovations are coloured into its readings by its own serial
// model: every marker keeps exactly its single-marker law, and the charted
// innovations have exactly the law the chart assumes. Method bootstrap
// resamples whole reference workers' innovation vectors instead (with their
// gaps and their missing markers, each marker's pooled innovations
// standardised to mean 0 and SD 1, as Chatterjee & Qiu 2009 and package
// monitor do for one marker) and needs no such assumption.
//
// # Charts
//
// Chart removes the correlation R of the charted vectors (innovations, or
// readings in mode direct) at each exam and offers (see Chart for the
// formulas): CUSUM and EWMA, the multivariate CUSUM of Crosier (1988,
// Technometrics 30) and EWMA of Lowry, Woodall, Champ & Rigdon (1992,
// Technometrics 34) restricted to each marker's harmful direction (side up,
// down or both per marker, the one-sided multivariate charts of Testik &
// Runger 2006, IIE Transactions 38, reflected at the boundary as the
// single-marker one-sided charts are at 0; for one marker they are the
// single-marker charts); MEWMA and MCUSUM, the same charts watching every
// direction; and Any, the markers' own CUSUMs combined by "any of them
// signals" with one common limit. EWMA weights are gap-aware per marker,
// w = 1-(1-lambda)^(d/unit) with d the years since that marker's previous
// reading, as for one marker. Contributions and Point.Top name the marker
// contributing most at a signal (Runger, Alt & Montgomery 1996).
//
// Exams where only some markers were measured. The EWMA kinds track the
// covariance V the EWMA vector would have for a healthy worker, exam by
// exam, and chart T2 = E' V^-1 E: whichever markers an exam measured, T2
// stays chi-square with p degrees of freedom at every exam, and with every
// marker measured at gaps of one unit MEWMA is exactly Lowry's chart. The
// CUSUM kinds complete an exam's vector by the missing markers'
// conditional means and charge the allowance in proportion to the markers
// measured (an exam measuring 2 of 3 markers counts as 2/3 of an exam), so
// that drift and spread per exam shrink together. TestMissingMarkers
// checks it by simulation (three persistent correlated markers, each
// missing at 35% of exams, 6000 workers, the statistic after the 50th
// exam): MEWMA's statistic is chi-square(3) whether that exam measured 1,
// 2 or 3 markers (means 2.92, 2.89, 3.04, SE 0.05-0.06; Kolmogorov-Smirnov
// p 0.16, 0.10, 0.55), and for CUSUM (means 2.29, 2.28, 2.33; 95th centiles
// 5.67, 5.60, 5.70), EWMA and MCUSUM the statistic after an exam of 1, 2
// or 3 markers has the same law (two-sample KS p >= 0.29). How often the
// chart moves does depend on how often markers are measured: at the limit
// for complete exams (ATS0 50 years), 35% missing readings lengthen the
// time to a false signal to 66 years for CUSUM, 73 for EWMA, 61 for MEWMA,
// 68 for MCUSUM and 73 for Any (whose markers are each measured 35% less
// often; TestMissingMarkersRate), so limits are calibrated on the
// reference workers' own pattern of missing markers (both methods do so).
// Without the proportional allowance, Crosier's MCUSUM took 3 times the
// target there.
//
// # Choice of the default chart
//
// TestChartEvidence: three markers (sbp, chol, fev1: phi 0.95, 0.9, 0.95
// per year, c 0.8, 0.7, 0.85; innovation correlations sbp-chol 0.4,
// sbp-fev1 -0.25, chol-fev1 -0.2), harmful directions up, up, down, gaps
// uniform on 0.5-3 years, mode whiten, method normal, 4000 paths with
// common random numbers. Expected years from the onset of a sustained
// shift, 10 years after the start of monitoring, to the signal, at equal
// ATS0 (SE in brackets):
//
//	ATS0  chart       limit  sbp+chol 0.5  all three 0.5   sbp 1        fev1 1       sbp 1, chol -1 | mean harmful
//	20 y  cusum       2.568   9.55 (0.21)   7.87 (0.19)   6.39 (0.17)   6.78 (0.19)   4.67 (0.14)  |   7.65
//	20 y  ewma        3.262   9.64 (0.22)   7.67 (0.19)   6.34 (0.18)   6.66 (0.19)   4.64 (0.14)  |   7.58
//	20 y  mewma       4.196  13.78 (0.29)  12.72 (0.28)   8.85 (0.22)   9.59 (0.24)   4.11 (0.11)  |  11.24
//	20 y  mcusum      3.010  13.14 (0.27)  12.63 (0.27)   8.41 (0.21)   9.19 (0.22)   3.93 (0.10)  |  10.84
//	20 y  any         1.737  10.38 (0.25)   8.21 (0.21)   7.39 (0.21)   7.30 (0.22)   8.45 (0.25)  |   8.32
//	20 y  cusum k0.3  3.233   8.94 (0.19)   7.30 (0.17)   6.23 (0.16)   6.39 (0.16)   4.67 (0.13)  |   7.21
//	20 y  any k0.3    2.279   9.49 (0.22)   7.48 (0.18)   6.98 (0.19)   6.86 (0.20)   7.85 (0.22)  |   7.70
//	50 y  cusum       3.744  25.06 (0.48)  20.21 (0.39)  17.60 (0.39)  18.96 (0.41)  11.58 (0.29)  |  20.46
//	50 y  ewma        5.615  25.55 (0.48)  20.67 (0.42)  18.55 (0.41)  18.89 (0.42)  12.65 (0.32)  |  20.91
//	50 y  mewma       6.503  34.36 (0.61)  32.50 (0.59)  23.17 (0.48)  25.80 (0.53)   9.03 (0.21)  |  28.96
//	50 y  mcusum      4.223  34.36 (0.59)  32.35 (0.56)  22.39 (0.45)  25.11 (0.50)   8.68 (0.18)  |  28.55
//	50 y  any         2.585  26.21 (0.50)  21.18 (0.44)  20.36 (0.46)  20.16 (0.48)  23.19 (0.53)  |  21.98
//	50 y  cusum k0.3  4.949  23.43 (0.40)  19.39 (0.34)  17.43 (0.34)  18.84 (0.37)  12.19 (0.25)  |  19.77
//	50 y  any k0.3    3.529  23.96 (0.43)  19.56 (0.37)  18.89 (0.41)  18.68 (0.40)  21.15 (0.46)  |  20.27
//
// (k: allowance, 0.5 unless stated; lambda 0.1.) Watching only the harmful
// directions makes the directed charts a third quicker than MEWMA and
// MCUSUM on harmful drifts; they pay on a drift that is half harmless
// (sbp up, chol down), which they see only through sbp. CUSUM and EWMA are
// within Monte Carlo error of each other here; the single-marker charts
// combined (any) are slower on every harmful drift but one.
//
// TestJointDriftCohort, the finite follow-ups of a workforce: 12000
// healthy and 4000 drifting workers of the same world, 10 exams each at
// gaps of 0.5-3 years, a drift of 0.5 SD in sbp and chol together from the
// fifth exam; each chart's limit set on the healthy workers themselves to
// realise exactly 20 worker-years per false signal:
//
//	chart       limit  caught  Kaplan-Meier median  restricted mean  median of caught
//	cusum       2.609  68.0%        4.63 y              4.72 y            2.19 y
//	ewma        3.406  66.5%        5.17                4.92              2.50
//	mewma       4.310  55.1%        7.82                5.84              3.11
//	mcusum      3.035  57.1%        7.42                5.73              2.93
//	any         1.810  65.1%        5.01                4.85              2.10
//	cusum k0.3  3.203  72.0%        4.08                4.54              2.32
//	any k0.3    2.314  69.4%        4.41                4.66              2.25
//
// (years from onset to signal; the Kaplan-Meier median and the restricted
// mean count every drifting worker, an uncaught one with its follow-up
// after onset.) The directed CUSUM catches more drifting workers, sooner,
// than the single-marker CUSUMs combined at the same false-signal rate,
// at either allowance, and more and sooner than the other kinds. With
// that, and its proportional handling of missing markers, DefaultKind =
// CUSUM, with the single-marker default allowance 0.5; an allowance of 0.3
// is quicker still for drifts as modest as these.
//
// # Limits and delays
//
// Limit and Delay work as package monitor's: method normal (simulation
// from the model) or bootstrap, horizon followup (worker-years of exams
// per false signal over workers followed like the reference workers) or
// long (the textbook ATS of one worker with an unending exam history),
// Monte Carlo with common random numbers and a fixed seed, standard errors
// reported, cancellable, every path capped. MEWMA on i.i.d. N(0, I)
// vectors at gaps of one unit is exact (package limit's integral
// equations, which match R spc's mewma.crit and mewma.arl to 2e-9).
// TestRealisedRate: limits from a simulated reference of 1500 workers x 8
// exams (20% of chol and fev1 readings missing; serial models and
// correlations estimated from it) realise, on fresh healthy workers from
// the true model, 20.50 and 19.93 worker-years per false signal for a
// 20-year follow-up target (cusum, methods normal and bootstrap; MEWMA
// 20.59, 21.40) and an ATS of 49.83 and 50.05 years for a 50-year long
// target (MEWMA 50.02, 50.20): all within 10% (SE 1% and 1.2%).
//
// Speed (BenchmarkLimit, three markers, the default chart, reference of
// 1000 workers x 6 exams, default 4000 paths): the Monte Carlo SE is
// 1.3-1.6% of the target for 20, 100 and 1000 years (task bound 2%). On
// the shared 2-core machine (load about 22, so wall times meant little) a
// limit took 0.18 s of CPU time for a 100-year target and 0.7-1.3 s for
// 1000 years (normal/followup 1.32, normal/long 0.93, bootstrap/followup
// 0.93, bootstrap/long 0.72), the paths running on both cores: about 0.1
// and 0.4-0.7 s on two idle cores (task bound 2 s).
package joint

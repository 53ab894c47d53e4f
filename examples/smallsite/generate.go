package smallsite

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"

	"veer/functions/published"
	"veer/functions/serial"
)

// DefaultSeed is the seed of the committed files.
const DefaultSeed uint64 = 20261215

// Workers is the size of the site.
const Workers = 60

// Parameters of the documented model (see the package comment).
const (
	femaleShare        = 0.4
	heightFemale       = 164.0 // mean, cm
	heightMale         = 177.0
	heightSDFemale     = 6.5
	heightSDMale       = 7.0
	entryMin, entryMax = 20.0, 55.0
	spanMin, spanMax   = 4.0, 12.0
	maxAge             = 65.0
	minExams           = 3
	gapPeriodicShare   = 0.80
	gapMissedShare     = 0.12 // the remaining 0.08 are ad-hoc visits
	affectedShare      = 0.15
	onsetFracMin       = 0.2
	onsetFracMax       = 0.5
	plateauMin         = 1.0
	plateauMax         = 1.5
	rampMin, rampMax   = 2.0, 4.0
)

// Serial models of the two markers' standardised residuals (package serial):
// a stable personal level with a yearly correlation of 0.95, holding 70% of
// the variance for SBP and 85% for FEV1, as in the main demo scenario.
var (
	SerialSBP  = serial.Params{Phi: 0.95, C: 0.70}
	SerialFEV1 = serial.Params{Phi: 0.95, C: 0.85}
)

// Exam is one exam row.
type Exam struct {
	Worker, Sex string
	Age         float64 // years, 2 decimals
	Height      float64 // cm, whole
	SBP         float64 // mmHg, whole
	FEV1        float64 // litres, 2 decimals
}

// Drift is one marker's drift in one worker: from age Onset it grows by
// Slope SD a year (negative for FEV1) until it reaches Plateau SD; zero
// values when the worker is not affected.
type Drift struct {
	Affected              bool
	Onset, Slope, Plateau float64
}

// shift is the drift at age a, in SD.
func (d Drift) shift(a float64) float64 {
	if !d.Affected || a <= d.Onset {
		return 0
	}
	return math.Copysign(math.Min(math.Abs(d.Slope)*(a-d.Onset), math.Abs(d.Plateau)), d.Plateau)
}

// Truth is what the generator knows about one worker.
type Truth struct {
	Worker, Sex string
	SBP, FEV1   Drift
}

// Site is the generated small site: exams ordered by worker and age, one
// truth row per worker.
type Site struct {
	Exams []Exam
	Truth []Truth
}

// References returns the synthetic SBP table and FEV1 equations as veer
// reads them from SBPTableCSV and FEV1EquationsJSON.
func References() (sbp, fev1 *published.Reference, err error) {
	var rows []published.TableRow
	for _, sex := range Sexes() {
		for a := TableMinAge; a <= TableMaxAge; a++ {
			p := sbpLMS(sex, float64(a))
			rows = append(rows, published.TableRow{Group: sex, Age: float64(a),
				L: parse(fixed(p.L, 4)), M: parse(fixed(p.M, 2)), S: parse(fixed(p.S, 5))})
		}
	}
	if sbp, err = published.NewTable(rows, published.Linear); err != nil {
		return nil, nil, err
	}
	fev1, err = published.DecodeEquations(FEV1EquationsJSON())
	return sbp, fev1, err
}

func parse(s string) float64 {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		panic(err)
	}
	return v
}

// Generate builds the site from seed: Workers workers, each from its own
// PCG stream, so the same seed always gives the same bytes.
func Generate(seed uint64) (*Site, error) {
	sbp, fev1, err := References()
	if err != nil {
		return nil, err
	}
	s := &Site{}
	for i := 1; i <= Workers; i++ {
		exams, truth, err := worker(seed, i, sbp, fev1)
		if err != nil {
			return nil, err
		}
		s.Exams = append(s.Exams, exams...)
		s.Truth = append(s.Truth, truth)
	}
	return s, nil
}

// worker draws one worker. The order of the draws is part of the
// byte-for-byte contract of the committed files.
func worker(seed uint64, i int, sbp, fev1 *published.Reference) ([]Exam, Truth, error) {
	rng := rand.New(rand.NewPCG(seed, uint64(i)))
	uniform := func(lo, hi float64) float64 { return lo + (hi-lo)*rng.Float64() }
	t := Truth{Worker: fmt.Sprintf("S%03d", i), Sex: Male}
	mean, sd := heightMale, heightSDMale
	if rng.Float64() < femaleShare {
		t.Sex, mean, sd = Female, heightFemale, heightSDFemale
	}
	height := math.Min(math.Max(math.Round(mean+sd*rng.NormFloat64()), 145), 200)
	first := uniform(entryMin, entryMax)
	end := math.Min(first+uniform(spanMin, spanMax), maxAge)
	ages := []float64{round2(first)}
	for a := first; ; {
		var gap float64
		switch p := rng.Float64(); {
		case p < gapPeriodicShare:
			gap = uniform(0.8, 1.4)
		case p < gapPeriodicShare+gapMissedShare:
			gap = uniform(2, 3)
		default:
			gap = uniform(0.1, 0.4)
		}
		a += gap
		if a > maxAge || (a > end && len(ages) >= minExams) {
			break
		}
		ages = append(ages, round2(a))
	}
	lo, hi := ages[0], ages[len(ages)-1]
	drift := func(sign float64) Drift {
		if rng.Float64() >= affectedShare {
			return Drift{}
		}
		onset := lo + uniform(onsetFracMin, onsetFracMax)*(hi-lo)
		plateau := uniform(plateauMin, plateauMax)
		ramp := uniform(rampMin, rampMax)
		return Drift{Affected: true, Onset: round2(onset), Slope: sign * round3(plateau/ramp), Plateau: sign * round3(plateau)}
	}
	t.SBP, t.FEV1 = drift(1), drift(-1)
	zs := serial.Simulate(SerialSBP, ages, rng, nil)
	zf := serial.Simulate(SerialFEV1, ages, rng, nil)
	exams := make([]Exam, len(ages))
	for j, a := range ages {
		ps, err := sbp.At(t.Sex, a, nil, false)
		if err != nil {
			return nil, t, err
		}
		pf, err := fev1.At(t.Sex, a, []float64{height}, false)
		if err != nil {
			return nil, t, err
		}
		ys, err1 := ps.At(zs[j] + t.SBP.shift(a))
		yf, err2 := pf.At(zf[j] + t.FEV1.shift(a))
		if err1 != nil || err2 != nil {
			return nil, t, fmt.Errorf("worker %s at %g: %v %v", t.Worker, a, err1, err2)
		}
		exams[j] = Exam{Worker: t.Worker, Sex: t.Sex, Age: a, Height: height, SBP: math.Round(ys), FEV1: round2(yf)}
	}
	return exams, t, nil
}

func round2(x float64) float64 { return math.Round(x*100) / 100 }
func round3(x float64) float64 { return math.Round(x*1000) / 1000 }

// ExamsCSV writes the exams with the header worker,sex,age,height,sbp,fev1
// and fixed decimals (age 2, height 0, sbp 0, fev1 2).
func (s *Site) ExamsCSV() []byte {
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	_ = w.Write([]string{"worker", "sex", "age", "height", "sbp", "fev1"})
	for _, e := range s.Exams {
		_ = w.Write([]string{e.Worker, e.Sex, fixed(e.Age, 2), fixed(e.Height, 0), fixed(e.SBP, 0), fixed(e.FEV1, 2)})
	}
	w.Flush()
	return buf.Bytes()
}

// TruthCSV writes the truth with the header
// worker,sex,affected_sbp,onset_sbp,affected_fev1,onset_fev1 (affected 1
// or 0; the onset age empty when not affected).
func (s *Site) TruthCSV() []byte {
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	_ = w.Write([]string{"worker", "sex", "affected_sbp", "onset_sbp", "affected_fev1", "onset_fev1"})
	field := func(d Drift) (string, string) {
		if !d.Affected {
			return "0", ""
		}
		return "1", fixed(d.Onset, 2)
	}
	for _, t := range s.Truth {
		as, os := field(t.SBP)
		af, of := field(t.FEV1)
		_ = w.Write([]string{t.Worker, t.Sex, as, os, af, of})
	}
	w.Flush()
	return buf.Bytes()
}

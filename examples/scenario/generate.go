package scenario

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// DefaultSeed is the seed of the committed demo files.
const DefaultSeed uint64 = 20260917

// Config sets the size of the scenario, its seed and the serial-correlation
// parameters. The curves, drift sizes and exam schedule are fixed by the
// documented model (see the package comment).
type Config struct {
	// Seed of the PCG streams; the same Config always gives the same data.
	Seed uint64
	// ReferenceWorkers is the number of healthy reference workers (>= 1).
	ReferenceWorkers int
	// WorkforceWorkers is the number of screened workers (>= 1).
	WorkforceWorkers int
	// AffectedShare is the probability, per marker and independently for
	// the two markers, that a workforce worker drifts (0 to 1).
	AffectedShare float64
	// Phi is the AR(1) correlation per year of the serial part, 0 < Phi < 1.
	Phi float64
	// Share is c, the share of the residual variance held by the serial
	// part, 0 <= Share <= 1; the rest is measurement noise.
	Share float64
	// CrossCorr is the correlation of the SBP and FEV1 residuals at the same
	// exam, -1 < CrossCorr < 1.
	CrossCorr float64
}

// DefaultConfig returns the configuration of the committed demo files:
// 1,500 reference workers, 800 workforce workers, 15% affected per marker,
// φ = 0.6 per year, c = 0.6, ρ = -0.2 and DefaultSeed.
func DefaultConfig() Config {
	return Config{
		Seed:             DefaultSeed,
		ReferenceWorkers: 1500,
		WorkforceWorkers: 800,
		AffectedShare:    0.15,
		Phi:              0.6,
		Share:            0.6,
		CrossCorr:        -0.2,
	}
}

// maxWorkers bounds each cohort so worker ids keep their width and memory
// stays modest.
const maxWorkers = 99999

// Validate reports the first setting of c that is out of range.
func (c Config) Validate() error {
	switch {
	case c.ReferenceWorkers < 1 || c.ReferenceWorkers > maxWorkers:
		return fmt.Errorf("scenario: ReferenceWorkers is %d; expected a whole number from 1 to %d", c.ReferenceWorkers, maxWorkers)
	case c.WorkforceWorkers < 1 || c.WorkforceWorkers > maxWorkers:
		return fmt.Errorf("scenario: WorkforceWorkers is %d; expected a whole number from 1 to %d", c.WorkforceWorkers, maxWorkers)
	case !(c.AffectedShare >= 0 && c.AffectedShare <= 1):
		return fmt.Errorf("scenario: AffectedShare is %v; expected a share from 0 to 1", c.AffectedShare)
	case !(c.Phi > 0 && c.Phi < 1):
		return fmt.Errorf("scenario: Phi is %v; expected a correlation per year strictly between 0 and 1", c.Phi)
	case !(c.Share >= 0 && c.Share <= 1):
		return fmt.Errorf("scenario: Share is %v; expected a share of variance from 0 to 1", c.Share)
	case !(c.CrossCorr > -1 && c.CrossCorr < 1):
		return fmt.Errorf("scenario: CrossCorr is %v; expected a correlation strictly between -1 and 1", c.CrossCorr)
	}
	return nil
}

// Exam is one exam row: worker id, group, age in years and the two readings
// (SBP in mmHg, FEV1 in litres), rounded as they are written to the files.
type Exam struct {
	Worker string
	Group  string
	Age    float64
	SBP    float64
	FEV1   float64
}

// Truth is what the generator knows about one workforce worker.
type Truth struct {
	Worker string
	Group  string
	SBP    Onset
	FEV1   Onset
}

// Scenario holds the generated cohorts. Exams are ordered by worker, then
// by age; Truth has one row per workforce worker in the same order.
type Scenario struct {
	Config    Config
	Reference []Exam
	Workforce []Exam
	Truth     []Truth
}

// Cohort tags, mixed into each worker's PCG stream.
const (
	cohortReference uint64 = 1
	cohortWorkforce uint64 = 2
)

// Schedule and drift constants of the documented model.
const (
	entryMin, entryMax  = 20.0, 57.0 // age at first exam
	spanMin, spanMax    = 3.0, 12.0  // planned follow-up, years
	minExams            = 3
	towerShareReference = 0.55
	towerShareWorkforce = 0.60
	onsetFracMin        = 0.15 // onset = first + U(onsetFracMin, onsetFracMax)·(last-first)
	onsetFracMax        = 0.60
	slopeSBPMin         = 0.25 // SD per year, upward
	slopeSBPMax         = 0.60
	slopeFEV1Min        = 0.20 // SD per year, downward
	slopeFEV1Max        = 0.50
	gapPeriodicShare    = 0.75
	gapMissedShare      = 0.15 // the remaining 0.10 are ad-hoc visits
	gapPeriodicMin      = 0.8
	gapPeriodicMax      = 1.5
	gapMissedMin        = 2.0
	gapMissedMax        = 4.0
	gapAdhocMin         = 0.1
	gapAdhocMax         = 0.5
)

// Generate builds the scenario described in the package comment.
func Generate(cfg Config) (*Scenario, error) {
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	s := &Scenario{
		Config:    cfg,
		Reference: make([]Exam, 0, cfg.ReferenceWorkers*7),
		Workforce: make([]Exam, 0, cfg.WorkforceWorkers*7),
		Truth:     make([]Truth, 0, cfg.WorkforceWorkers),
	}
	for i := 1; i <= cfg.ReferenceWorkers; i++ {
		exams, _ := worker(cfg, cohortReference, i)
		s.Reference = append(s.Reference, exams...)
	}
	for i := 1; i <= cfg.WorkforceWorkers; i++ {
		exams, truth := worker(cfg, cohortWorkforce, i)
		s.Workforce = append(s.Workforce, exams...)
		s.Truth = append(s.Truth, truth)
	}
	return s, nil
}

// worker generates one worker from its own PCG stream. The order of the
// draws is part of the byte-for-byte contract of the committed files.
func worker(cfg Config, cohort uint64, i int) ([]Exam, Truth) {
	rng := rand.New(rand.NewPCG(cfg.Seed, cohort<<32|uint64(i)))
	uniform := func(lo, hi float64) float64 { return lo + (hi-lo)*rng.Float64() }

	id, towerShare := fmt.Sprintf("R%05d", i), towerShareReference
	if cohort == cohortWorkforce {
		id, towerShare = fmt.Sprintf("W%05d", i), towerShareWorkforce
	}
	group := Workshop
	if rng.Float64() < towerShare {
		group = Tower
	}

	// Exam ages.
	first := uniform(entryMin, entryMax)
	end := math.Min(first+uniform(spanMin, spanMax), MaxAge)
	ages := []float64{round2(first)}
	for t := first; ; {
		var gap float64
		switch p := rng.Float64(); {
		case p < gapPeriodicShare:
			gap = uniform(gapPeriodicMin, gapPeriodicMax)
		case p < gapPeriodicShare+gapMissedShare:
			gap = uniform(gapMissedMin, gapMissedMax)
		default:
			gap = uniform(gapAdhocMin, gapAdhocMax)
		}
		t += gap
		// Entry < 57 and gaps < 4 keep the first minExams exams below MaxAge.
		if t > MaxAge || (t > end && len(ages) >= minExams) {
			break
		}
		ages = append(ages, round2(t))
	}

	// Truth (workforce only); drawn before the residuals.
	truth := Truth{Worker: id, Group: group}
	if cohort == cohortWorkforce {
		lo, hi := ages[0], ages[len(ages)-1]
		draw := func(slopeMin, slopeMax, sign float64) Onset {
			if rng.Float64() >= cfg.AffectedShare {
				return Onset{}
			}
			onset := round2(lo + uniform(onsetFracMin, onsetFracMax)*(hi-lo))
			return Onset{Affected: true, Age: onset, Slope: sign * round3(uniform(slopeMin, slopeMax))}
		}
		truth.SBP = draw(slopeSBPMin, slopeSBPMax, 1)
		truth.FEV1 = draw(slopeFEV1Min, slopeFEV1Max, -1)
	}

	// Residuals e = √c·s + √(1-c)·w for both markers, correlated with ρ.
	rho, rhoC := cfg.CrossCorr, math.Sqrt(1-cfg.CrossCorr*cfg.CrossCorr)
	pair := func() (float64, float64) {
		a, b := rng.NormFloat64(), rng.NormFloat64()
		return a, rho*a + rhoC*b
	}
	sqC, sqNoise := math.Sqrt(cfg.Share), math.Sqrt(1-cfg.Share)
	exams := make([]Exam, len(ages))
	var s1, s2 float64
	for j, t := range ages {
		z1, z2 := pair()
		if j == 0 {
			s1, s2 = z1, z2 // stationary start
		} else {
			a := math.Pow(cfg.Phi, t-ages[j-1])
			b := math.Sqrt(1 - a*a)
			s1, s2 = a*s1+b*z1, a*s2+b*z2
		}
		w1, w2 := pair()
		e1 := sqC*s1 + sqNoise*w1
		e2 := sqC*s2 + sqNoise*w2
		exams[j] = Exam{
			Worker: id,
			Group:  group,
			Age:    t,
			SBP:    reading(SBP, group, t, e1+truth.SBP.Shift(t)),
			FEV1:   reading(FEV1, group, t, e2+truth.FEV1.Shift(t)),
		}
	}
	return exams, truth
}

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
	// Share is c per marker, indexed by Marker (Share[SBP], Share[FEV1]):
	// the share of the residual variance held by the serial part,
	// 0 <= c <= 1; the rest is measurement noise.
	Share [2]float64
	// CrossCorr is ρ, the correlation of the two markers' AR innovations and
	// of their measurement noises at the same exam, -1 < CrossCorr < 1; the
	// residuals then correlate ρ·(√(c₁c₂) + √((1-c₁)(1-c₂))).
	CrossCorr float64
	// DiagnosedShare is the probability that a drifting worker's condition
	// is diagnosed some years after the onset (0 to 1); OtherDiagnosedShare
	// the probability that a worker who does not drift in that marker is
	// diagnosed all the same, by a route the marker does not show (0 to 1).
	// See Outcome.
	DiagnosedShare, OtherDiagnosedShare float64
}

// DefaultConfig returns the configuration of the committed demo files:
// 1,500 reference workers, 800 workforce workers, 15% affected per marker,
// φ = 0.95 per year, c = 0.70 (SBP) and 0.85 (FEV1), ρ = -0.2 and
// DefaultSeed. The package comment gives the reasons for these values.
func DefaultConfig() Config {
	return Config{
		Seed:             DefaultSeed,
		ReferenceWorkers: 1500,
		WorkforceWorkers: 800,
		AffectedShare:    0.15,
		Phi:              0.95,
		Share:            [2]float64{SBP: 0.7, FEV1: 0.85},
		CrossCorr:        -0.2,

		DiagnosedShare:      0.7,
		OtherDiagnosedShare: 0.02,
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
	case !(c.Share[SBP] >= 0 && c.Share[SBP] <= 1):
		return fmt.Errorf("scenario: Share[SBP] is %v; expected a share of variance from 0 to 1", c.Share[SBP])
	case !(c.Share[FEV1] >= 0 && c.Share[FEV1] <= 1):
		return fmt.Errorf("scenario: Share[FEV1] is %v; expected a share of variance from 0 to 1", c.Share[FEV1])
	case !(c.CrossCorr > -1 && c.CrossCorr < 1):
		return fmt.Errorf("scenario: CrossCorr is %v; expected a correlation strictly between -1 and 1", c.CrossCorr)
	case !(c.DiagnosedShare >= 0 && c.DiagnosedShare <= 1):
		return fmt.Errorf("scenario: DiagnosedShare is %v; expected a share from 0 to 1", c.DiagnosedShare)
	case !(c.OtherDiagnosedShare >= 0 && c.OtherDiagnosedShare <= 1):
		return fmt.Errorf("scenario: OtherDiagnosedShare is %v; expected a share from 0 to 1", c.OtherDiagnosedShare)
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
// by age; Truth and Outcomes have one row per workforce worker in the same
// order.
type Scenario struct {
	Config    Config
	Reference []Exam
	Workforce []Exam
	Truth     []Truth
	Outcomes  []Outcome
}

// Outcome is what an officer's records say of one workforce worker: whether
// the condition each marker watches (raised blood pressure for SBP, airflow
// obstruction for FEV1) was diagnosed, and at what age.
type Outcome struct {
	Worker       string
	Hypertension Diagnosis
	Obstruction  Diagnosis
}

// Diagnosis is one condition's outcome: diagnosed or not, and the age at
// diagnosis in years (0 when not diagnosed).
type Diagnosis struct {
	Diagnosed bool
	Age       float64
}

// Cohort tags, mixed into each worker's PCG stream.
const (
	cohortReference uint64 = 1
	cohortWorkforce uint64 = 2
	cohortOutcomes  uint64 = 3
)

// Schedule and drift constants of the documented model.
const (
	entryMin, entryMax  = 20.0, 57.0 // age at first exam
	spanMin, spanMax    = 5.0, 15.0  // planned follow-up, years
	minExams            = 3
	towerShareReference = 0.55
	towerShareWorkforce = 0.60
	onsetFracMin        = 0.20 // onset = first + U(onsetFracMin, onsetFracMax)·(last-first)
	onsetFracMax        = 0.50
	plateauMin          = 1.0 // size |A| of the sustained shift, SD
	plateauMax          = 1.5
	rampMin             = 2.0 // years from onset to the plateau, |A/β|
	rampMax             = 4.0
	gapPeriodicShare    = 0.75
	gapMissedShare      = 0.15 // the remaining 0.10 are ad-hoc visits
	gapPeriodicMin      = 0.8
	gapPeriodicMax      = 1.5
	gapMissedMin        = 2.0
	gapMissedMax        = 4.0
	gapAdhocMin         = 0.1
	gapAdhocMax         = 0.5
	lagMin              = 2.0 // years from onset to diagnosis, U(lagMin, lagMax)
	lagMax              = 6.0
	recordsAfter        = 1.0 // diagnoses up to this many years after the last exam are on record
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
		s.Outcomes = append(s.Outcomes, outcome(cfg, i, truth, exams[0].Age, exams[len(exams)-1].Age))
	}
	return s, nil
}

// outcome draws a workforce worker's diagnoses from its own PCG stream
// (separate from the exams', so the exams do not depend on it): a drifting
// marker's condition is diagnosed with probability DiagnosedShare, U(2, 6)
// years after the onset; a marker that does not drift with probability
// OtherDiagnosedShare, at an age uniform over the exams. A diagnosis more
// than a year after the last exam is not on record (the worker has left).
func outcome(cfg Config, i int, truth Truth, first, last float64) Outcome {
	rng := rand.New(rand.NewPCG(cfg.Seed, cohortOutcomes<<32|uint64(i)))
	uniform := func(lo, hi float64) float64 { return lo + (hi-lo)*rng.Float64() }
	draw := func(o Onset) Diagnosis {
		var age float64
		if o.Affected {
			if rng.Float64() >= cfg.DiagnosedShare {
				return Diagnosis{}
			}
			age = o.Age + uniform(lagMin, lagMax)
		} else {
			if rng.Float64() >= cfg.OtherDiagnosedShare {
				return Diagnosis{}
			}
			age = uniform(first, last)
		}
		age = round2(age)
		if age > last+recordsAfter {
			return Diagnosis{}
		}
		return Diagnosis{Diagnosed: true, Age: age}
	}
	return Outcome{Worker: truth.Worker, Hypertension: draw(truth.SBP), Obstruction: draw(truth.FEV1)}
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
		draw := func(sign float64) Onset {
			if rng.Float64() >= cfg.AffectedShare {
				return Onset{}
			}
			onset := round2(lo + uniform(onsetFracMin, onsetFracMax)*(hi-lo))
			plateau := round3(uniform(plateauMin, plateauMax))
			ramp := uniform(rampMin, rampMax)
			return Onset{Affected: true, Age: onset, Slope: sign * round3(plateau/ramp), Plateau: sign * plateau}
		}
		truth.SBP = draw(1)
		truth.FEV1 = draw(-1)
	}

	// Residuals e = √c·s + √(1-c)·w for both markers, correlated with ρ.
	rho, rhoC := cfg.CrossCorr, math.Sqrt(1-cfg.CrossCorr*cfg.CrossCorr)
	pair := func() (float64, float64) {
		a, b := rng.NormFloat64(), rng.NormFloat64()
		return a, rho*a + rhoC*b
	}
	sqC1, sqNoise1 := math.Sqrt(cfg.Share[SBP]), math.Sqrt(1-cfg.Share[SBP])
	sqC2, sqNoise2 := math.Sqrt(cfg.Share[FEV1]), math.Sqrt(1-cfg.Share[FEV1])
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
		e1 := sqC1*s1 + sqNoise1*w1
		e2 := sqC2*s2 + sqNoise2*w2
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

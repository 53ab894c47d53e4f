package limit

import (
	"errors"
	"sync/atomic"
	"testing"
	"time"

	"veer/functions/chart"
)

// TestStop checks that a cancelled simulation ends early with ErrStopped
// and that a Stop answering false changes nothing.
func TestStop(t *testing.T) {
	var asked atomic.Int64
	stopAfter := func(n int64) func() bool {
		return func() bool { return asked.Add(1) > n }
	}
	mc := MonteCarlo{Paths: 2000, Seed: 3, Stop: stopAfter(50)}
	if _, err := mc.Calibrate(chart.DefaultSpec(), 200, iid(1, 0), 0); !errors.Is(err, ErrStopped) {
		t.Errorf("Calibrate after a stop: %v, want ErrStopped", err)
	}
	if n := asked.Load(); n > 60 {
		t.Errorf("Calibrate went on after the stop: Stop asked %d times", n)
	}
	asked.Store(0)
	if _, err := mc.Delay(chart.DefaultSpec(), 4, iid(1, 1), 0); !errors.Is(err, ErrStopped) {
		t.Errorf("Delay after a stop: %v, want ErrStopped", err)
	}
	plain := MonteCarlo{Paths: 500, Seed: 3}
	never := plain
	never.Stop = func() bool { return false }
	a, err1 := plain.Calibrate(chart.DefaultSpec(), 200, iid(1, 0), 0)
	b, err2 := never.Calibrate(chart.DefaultSpec(), 200, iid(1, 0), 0)
	if err1 != nil || err2 != nil || a != b {
		t.Errorf("a Stop that never stops changed the result: %+v %v / %+v %v", a, err1, b, err2)
	}
}

// TestStopWithinAPath: a path whose time hardly advances (a gap of 1e-12
// years never reaches the target) still stops promptly when asked, and
// every path ends at CapExams exams.
func TestStopWithinAPath(t *testing.T) {
	for _, name := range []string{"Calibrate", "Delay"} {
		t.Run(name, func(t *testing.T) {
			var asked atomic.Int64
			mc := MonteCarlo{Paths: 4, Seed: 1, Workers: 1, CapExams: 1 << 40, Stop: func() bool { return asked.Add(1) > 20 }}
			done := make(chan error, 1)
			go func() {
				var err error
				if name == "Calibrate" {
					_, err = mc.Calibrate(chart.DefaultSpec(), 20, iid(1e-12, 0), 0)
				} else {
					_, err = mc.Delay(chart.DefaultSpec(), 1e6, iid(1e-12, 0), 0)
				}
				done <- err
			}()
			select {
			case err := <-done:
				if !errors.Is(err, ErrStopped) {
					t.Errorf("%v; want ErrStopped", err)
				}
			case <-time.After(20 * time.Second):
				t.Fatal("the path did not stop within 20 s of being asked")
			}
		})
	}
	// Without a stop, the exam cap ends every path (censored).
	cal, err := MonteCarlo{Paths: 50, Seed: 1, CapExams: 2000}.Calibrate(chart.DefaultSpec(), 20, iid(1e-12, 0), 0)
	if err == nil {
		t.Errorf("a target no capped path can reach gave %+v", cal)
	}
}

// TestMaxExams: a simulation that would step through more exams than
// MaxExams ends with a *WorkError matching ErrTooMuchWork; within the
// budget the result is as without one.
func TestMaxExams(t *testing.T) {
	mc := MonteCarlo{Paths: 1000, Seed: 2, MaxExams: 20_000}
	if _, err := mc.Calibrate(chart.DefaultSpec(), 200, iid(1, 0), 0); !errors.Is(err, ErrTooMuchWork) {
		t.Errorf("Calibrate over budget: %v", err)
	}
	var we *WorkError
	if _, err := mc.Delay(chart.DefaultSpec(), 5, iid(1, 0), 0); !errors.As(err, &we) || we.Max != 20_000 {
		t.Errorf("Delay over budget: %v", err)
	}
	free := MonteCarlo{Paths: 500, Seed: 2}
	capped := free
	capped.MaxExams = 1 << 40
	a, err1 := free.Calibrate(chart.DefaultSpec(), 100, iid(1, 0), 0)
	b, err2 := capped.Calibrate(chart.DefaultSpec(), 100, iid(1, 0), 0)
	if err1 != nil || err2 != nil || a != b {
		t.Errorf("a budget that holds changed the result: %+v %v / %+v %v", a, err1, b, err2)
	}
}

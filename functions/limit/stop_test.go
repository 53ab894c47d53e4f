package limit

import (
	"errors"
	"sync/atomic"
	"testing"

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

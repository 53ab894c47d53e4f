package main

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"veer/functions/serial"
)

// fitCohortCSV writes (once; the file is kept in the system's temporary
// folder for the R script to be run on by hand) a synthetic reference
// cohort of 100,000 workers x 7 exams, the size of the speed target of
// veer fit: first exam at 18-48, gaps of 0.3 to 4.3 years (mostly short),
// readings 120 + 0.5 (age - 40) + 3 sin(age/5) + 8 e with e from the
// serial model (serial.Simulate) with the given parameters: independent
// readings for serial.Params{}.
func fitCohortCSV(tb testing.TB, name string, p serial.Params) string {
	tb.Helper()
	path := filepath.Join(os.TempDir(), "veer-bench-fit-"+name+".csv")
	if _, err := os.Stat(path); err == nil {
		return path
	}
	rng := rand.New(rand.NewPCG(2024, 1))
	const workers, per = 100_000, 7
	b := make([]byte, 0, 26*workers*per)
	b = append(b, "worker,age,sbp\n"...)
	times := make([]float64, per)
	var z []float64
	for w := range workers {
		t := 18 + 30*rng.Float64()
		for k := range times {
			times[k] = math.Round(t*1000) / 1000
			t += 0.3 + 4*rng.Float64()*rng.Float64()
		}
		z = serial.Simulate(p, times, rng, z[:0])
		for k, t := range times {
			b = append(b, 'W')
			b = strconv.AppendInt(b, int64(w), 10)
			b = append(b, ',')
			b = strconv.AppendFloat(b, t, 'f', 3, 64)
			b = append(b, ',')
			b = strconv.AppendFloat(b, 120+0.5*(t-40)+3*math.Sin(t/5)+8*z[k], 'f', 1, 64)
			b = append(b, '\n')
		}
	}
	tmp := path + ".tmp"
	if err := os.WriteFile(tmp, b, 0o644); err != nil {
		tb.Fatal(err)
	}
	if err := os.Rename(tmp, path); err != nil {
		tb.Fatal(err)
	}
	return path
}

// rPipeline runs testdata/bench_fit.R once on path and returns the seconds
// R reports (read.csv + dpill + locpoly, without R's start-up); ok is
// false when R or KernSmooth is missing.
func rPipeline(tb testing.TB, path string) (seconds float64, ok bool) {
	tb.Helper()
	rs, err := exec.LookPath("Rscript")
	if err != nil {
		return 0, false
	}
	var out bytes.Buffer
	cmd := exec.Command(rs, filepath.Join("testdata", "bench_fit.R"), path, "1")
	cmd.Stdout, cmd.Stderr = &out, &out
	if err := cmd.Run(); err != nil {
		tb.Logf("R baseline not run: %v\n%s", err, out.String())
		return 0, false
	}
	sc := bufio.NewScanner(&out)
	for sc.Scan() {
		if v, found := strings.CutPrefix(sc.Text(), "elapsed "); found {
			s, err := strconv.ParseFloat(v, 64)
			return s, err == nil
		}
	}
	return 0, false
}

// BenchmarkFit700k: veer fit of 700,000 rows (100,000 workers x 7 exams)
// from a CSV file, end to end (read, reference curves with cross-validated
// bandwidths, serial estimate and its test, diagnostics, model file), with
// serially correlated readings (phi 0.7 per year, c 0.6) and with
// independent ones. Target: no slower than R's read.csv + KernSmooth dpill
// + locpoly on the same file (testdata/bench_fit.R), measured in the same
// run: each iteration runs the R script once (outside the timer), then veer
// fit, so both see the same machine load. Reported: s/fit (veer), R-s
// (R, median) and x-R (the ratio of the medians).
func BenchmarkFit700k(b *testing.B) {
	for _, bc := range []struct {
		name string
		p    serial.Params
	}{
		{"correlated", serial.Params{Phi: 0.7, C: 0.6}},
		{"independent", serial.Params{}},
	} {
		b.Run(bc.name, func(b *testing.B) {
			in := fitCohortCSV(b, bc.name, bc.p)
			out := filepath.Join(b.TempDir(), "model.json")
			args := []string{"fit", "--in", in, "--id", "worker", "--time", "age", "--value", "sbp", "--name", "bench", "--out", out}
			var veer, r []float64
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				b.StopTimer()
				if s, ok := rPipeline(b, in); ok {
					r = append(r, s)
				}
				b.StartTimer()
				start := time.Now()
				if code := run(&env{stdout: io.Discard, stderr: io.Discard, stdin: strings.NewReader("")}, args); code != 0 {
					b.Fatalf("veer fit: exit %d", code)
				}
				veer = append(veer, time.Since(start).Seconds())
			}
			b.StopTimer()
			mv := median(veer)
			b.ReportMetric(mv, "s/fit")
			if len(r) > 0 {
				mr := median(r)
				b.ReportMetric(mr, "R-s")
				b.ReportMetric(mv/mr, "x-R")
				b.Logf("%s (%s): veer fit median %.3f s, R read.csv+dpill+locpoly median %.3f s over %d runs: ratio %.2f", bc.name, in, mv, mr, len(r), mv/mr)
			}
		})
	}
}

func median(v []float64) float64 {
	s := slices.Clone(v)
	slices.Sort(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}

// TestFitReportsSerialFinding: veer fit says in words whether serial
// correlation was found.
func TestFitReportsSerialFinding(t *testing.T) {
	dir := t.TempDir()
	for _, tc := range []struct {
		name string
		p    serial.Params
		want string
	}{
		{"independent", serial.Params{}, "no serial correlation detected"},
		{"correlated", serial.Params{Phi: 0.7, C: 0.6}, "serial correlation detected (consecutive exams"},
	} {
		rng := rand.New(rand.NewPCG(5, 6))
		var b strings.Builder
		b.WriteString("worker,age,sbp\n")
		for w := range 400 {
			times := []float64{25 + 20*rng.Float64()}
			for range 5 {
				times = append(times, times[len(times)-1]+0.5+2*rng.Float64())
			}
			for k, z := range serial.Simulate(tc.p, times, rng, nil) {
				fmt.Fprintf(&b, "W%d,%.3f,%.2f\n", w, times[k], 120+0.5*(times[k]-40)+8*z)
			}
		}
		in := writeFile(t, filepath.Join(dir, tc.name+".csv"), []byte(b.String()))
		code, _, stderr := cli("fit", "--in", in, "--id", "worker", "--time", "age", "--value", "sbp", "--bandwidth", "8", "--name", "x", "--out", filepath.Join(dir, tc.name+".json"))
		if code != 0 {
			t.Fatalf("%s: exit %d: %s", tc.name, code, stderr)
		}
		if !strings.Contains(stderr, tc.want) {
			t.Errorf("%s: veer fit says %q, want it to say %q", tc.name, stderr, tc.want)
		}
		if tc.name == "correlated" && strings.Contains(stderr, "no serial correlation") {
			t.Errorf("correlated readings: %s", stderr)
		}
	}
}

package monitor_test

import (
	"fmt"

	"veer/functions/chart"
	"veer/functions/monitor"
	"veer/functions/serial"
)

func ExampleRun() {
	set := monitor.Settings{Chart: chart.DefaultSpec(), Mode: monitor.DefaultMode, Serial: serial.Params{Phi: 0.7, C: 0.6}}
	rows, err := monitor.Run(set, 2, []float64{40.1, 41.0, 43.2, 44.0}, []float64{0.3, 1.4, 1.9, 2.2}, nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, r := range rows {
		fmt.Printf("%.1f z %.1f innovation %.2f stat %.2f signal %v\n", r.Time, r.Z, r.Innovation, r.Stat, r.Signal)
	}
	// Output:
	// 40.1 z 0.3 innovation 0.30 stat 0.00 signal false
	// 41.0 z 1.4 innovation 1.41 stat 0.91 signal false
	// 43.2 z 1.9 innovation 1.62 stat 2.03 signal true
	// 44.0 z 2.2 innovation 1.44 stat 2.97 signal true
}

func ExampleLimit() {
	// "Flag a healthy worker once every 20 years on average", exams every
	// 1.5 years, correlated readings charted directly.
	c := monitor.Calibration{
		Settings: monitor.Settings{Chart: chart.DefaultSpec(), Mode: monitor.Direct, Serial: serial.Params{Phi: 0.7, C: 0.6}},
		Method:   monitor.Normal,
		Gap:      1.5,
		Seed:     1,
	}
	r, err := monitor.Limit(c, 20)
	fmt.Printf("limit %.2f (SE %.2f), ATS %.1f years (SE %.1f) %v\n", r.H, r.SEH, r.ATS, r.SE, err)
	d, _ := monitor.Delay(c, r.H, 1, 0)
	fmt.Printf("1-SD shift flagged after %.1f years (SE %.1f)\n", d.Years, d.SE)
	_, err = monitor.Limit(c, 1)
	fmt.Println(err)
	// Output:
	// limit 1.01 (SE 0.01), ATS 20.0 years (SE 0.3) <nil>
	// 1-SD shift flagged after 4.8 years (SE 0.1)
	// target must be at least one mean gap between exams (1.5 years), got 1
}

func ExampleDelay() {
	// Expected years to flag a sustained 0.5-SD rise that starts after 10
	// healthy years, exams every 0.5-3 years (resampled from this list).
	c := monitor.Calibration{
		Settings: monitor.Settings{Chart: chart.DefaultSpec(), Mode: monitor.Direct, Serial: serial.Params{Phi: 0.7, C: 0.6}},
		Method:   monitor.Normal,
		Gaps:     []float64{0.5, 1, 1, 1.5, 2, 2, 3},
		Seed:     1,
	}
	lim, _ := monitor.Limit(c, 30)
	d, _ := monitor.Delay(c, lim.H, 0.5, 10)
	fmt.Printf("limit %.2f; delay %.1f years (SE %.1f); %d of %d paths signalled before the onset\n", lim.H, d.Years, d.SE, d.Early, d.Paths)
	// Output:
	// limit 1.46; delay 11.6 years (SE 0.2); 1014 of 4000 paths signalled before the onset
}

func ExampleFirstSignal() {
	set := monitor.Settings{Chart: chart.DefaultSpec(), Mode: monitor.Whiten, Serial: serial.Params{Phi: 0.5, C: 0.5}}
	rows, _ := monitor.Run(set, 1.5, []float64{30, 31, 32.5, 33}, []float64{0.1, 1.2, 1.9, 2.4}, nil)
	t, ok := monitor.FirstSignal(rows)
	fmt.Println(t, ok)
	// Output:
	// 32.5 true
}

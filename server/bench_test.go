package server

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"slices"
	"strconv"
	"testing"
	"time"

	"github.com/gorilla/websocket"
)

func quietServer(b *testing.B) *harness {
	return startServer(b, "", func(c *Config) { c.Logger = slog.New(slog.DiscardHandler) })
}

func benchDial(b *testing.B, h *harness) *websocket.Conn {
	c, _, err := h.DialRaw()
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { c.Close() })
	return c
}

// reportLatency adds p50 and p99 of the per-call round trips, in µs.
func reportLatency(b *testing.B, lat []time.Duration) {
	slices.Sort(lat)
	q := func(p float64) float64 {
		return float64(lat[min(len(lat)-1, int(p*float64(len(lat))))].Nanoseconds()) / 1e3
	}
	b.ReportMetric(q(0.50), "p50-µs")
	b.ReportMetric(q(0.99), "p99-µs")
}

// BenchmarkWebsocketCall: one cheap call over the websocket on loopback,
// round trip (send, compute, answer). Each iteration has new arguments, so
// every call is computed (not served from the cache).
func BenchmarkWebsocketCall(b *testing.B) {
	h := quietServer(b)
	c := benchDial(b, h)
	lat := make([]time.Duration, 0, b.N)
	buf := make([]byte, 0, 128)
	c0 := processCPU()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		buf = fmt.Appendf(buf[:0], `{"id":%d,"fn":"VEER.T.ADD","args":[%d,0.5]}`, i, i)
		t0 := time.Now()
		if err := c.WriteMessage(websocket.TextMessage, buf); err != nil {
			b.Fatal(err)
		}
		_, msg, err := c.ReadMessage()
		if err != nil {
			b.Fatal(err)
		}
		lat = append(lat, time.Since(t0))
		if !bytes.Contains(msg, []byte(`"value"`)) {
			b.Fatalf("answer %s", msg)
		}
	}
	b.StopTimer()
	b.ReportMetric(float64((processCPU()-c0).Nanoseconds())/1e3/float64(b.N), "cpu-µs/op")
	reportLatency(b, lat)
}

// BenchmarkWebsocketCallCached: the same call repeated (a spreadsheet
// recalculating): answered from the result cache.
func BenchmarkWebsocketCallCached(b *testing.B) {
	h := quietServer(b)
	c := benchDial(b, h)
	lat := make([]time.Duration, 0, b.N)
	msg := []byte(`{"id":1,"fn":"VEER.T.ADD","args":[41,1]}`)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		t0 := time.Now()
		c.WriteMessage(websocket.TextMessage, msg)
		if _, _, err := c.ReadMessage(); err != nil {
			b.Fatal(err)
		}
		lat = append(lat, time.Since(t0))
	}
	b.StopTimer()
	reportLatency(b, lat)
}

// BenchmarkWebsocketBatch10k: a batch of 10,000 cheap calls in one frame,
// answered in one frame. New arguments every iteration (no cache hits).
func BenchmarkWebsocketBatch10k(b *testing.B) {
	h := quietServer(b)
	c := benchDial(b, h)
	const n = 10_000
	var cpu time.Duration
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		b.StopTimer()
		buf := make([]byte, 0, n*56)
		buf = append(buf, '[')
		for j := 0; j < n; j++ {
			if j > 0 {
				buf = append(buf, ',')
			}
			buf = fmt.Appendf(buf, `{"id":%d,"fn":"VEER.T.ADD","args":[%d,%d]}`, j, j, i)
		}
		buf = append(buf, ']')
		c0 := processCPU()
		b.StartTimer()
		if err := c.WriteMessage(websocket.TextMessage, buf); err != nil {
			b.Fatal(err)
		}
		_, msg, err := c.ReadMessage()
		if err != nil {
			b.Fatal(err)
		}
		b.StopTimer()
		cpu += processCPU() - c0
		if msg[0] != '[' || bytes.Count(msg, []byte(`"value"`)) != n {
			b.Fatalf("batch answer: %.200s", msg)
		}
		b.StartTimer()
	}
	b.ReportMetric(float64(b.Elapsed().Microseconds())/1e3/float64(b.N), "ms/batch")
	b.ReportMetric(float64(cpu.Microseconds())/1e3/float64(b.N), "cpu-ms/batch")
}

// chartPayload is a VEER.T.CUSUM call over rows exam rows (1,000 workers)
// and the JSON of its answer.
func chartPayload(rows, variant int) []byte {
	buf := make([]byte, 0, rows*40)
	buf = append(buf, `{"fn":"VEER.T.CUSUM","args":[[`...)
	for i := 0; i < rows; i++ {
		if i > 0 {
			buf = append(buf, ',')
		}
		buf = fmt.Appendf(buf, `"W%05d"`, i%1000)
	}
	buf = append(buf, "],["...)
	for i := 0; i < rows; i++ {
		if i > 0 {
			buf = append(buf, ',')
		}
		buf = strconv.AppendFloat(buf, 20+float64(i/1000)*0.37, 'f', -1, 64)
	}
	buf = append(buf, "],["...)
	for i := 0; i < rows; i++ {
		if i > 0 {
			buf = append(buf, ',')
		}
		buf = strconv.AppendFloat(buf, float64((i*7919+variant)%2000)/1000-1, 'f', -1, 64)
	}
	return append(buf, `],"side=up; allowance=0.25"]}`...)
}

// jsonBaseline is the bare JSON work of the same exchange with
// encoding/json: decode the request into generic values and encode the
// answer (given as generic values, decoded beforehand).
func jsonBaseline(b *testing.B, req []byte, answer any) {
	var r map[string]any
	if err := json.Unmarshal(req, &r); err != nil {
		b.Fatal(err)
	}
	if _, err := json.Marshal(answer); err != nil {
		b.Fatal(err)
	}
}

func decodeAnswer(b *testing.B, resp []byte) any {
	var a any
	if err := json.Unmarshal(resp, &a); err != nil {
		b.Fatal(err)
	}
	return a
}

// BenchmarkChart100k: a chart statistic over 100,000 exam rows end to end
// over HTTP (JSON in, compute, JSON out), with a new payload each iteration
// so the cache never answers. The "x-json" metric is the ratio to the bare
// encoding/json decode of the same request plus decode and encode of the
// same answer, measured in the same run.
func BenchmarkChart100k(b *testing.B) {
	const rows = 100_000
	h := quietServer(b)
	payloads := make([][]byte, 4)
	for i := range payloads {
		payloads[i] = chartPayload(rows, i)
	}
	var lastResp []byte
	var cpu time.Duration
	b.SetBytes(int64(len(payloads[0])))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		req := payloads[i%len(payloads)]
		if i >= len(payloads) {
			b.StopTimer()
			req = chartPayload(rows, i)
			b.StartTimer()
		}
		c0 := processCPU()
		resp, err := http.Post(h.URL+"/v1/call", "application/json", bytes.NewReader(req))
		if err != nil {
			b.Fatal(err)
		}
		lastResp, _ = io.ReadAll(resp.Body)
		resp.Body.Close()
		cpu += processCPU() - c0
		if resp.StatusCode != 200 || !bytes.HasPrefix(lastResp, []byte(`{"value":[[`)) {
			b.Fatalf("answer %d: %.200s", resp.StatusCode, lastResp)
		}
	}
	b.StopTimer()
	perOp := b.Elapsed() / time.Duration(b.N)
	const baseRuns = 3
	ans := decodeAnswer(b, lastResp)
	t0, c0 := time.Now(), processCPU()
	for i := 0; i < baseRuns; i++ {
		jsonBaseline(b, payloads[0], ans)
	}
	base, baseCPU := time.Since(t0)/baseRuns, (processCPU()-c0)/baseRuns
	b.ReportMetric(float64(base.Microseconds())/1e3, "json-ms")
	b.ReportMetric(float64(perOp)/float64(base), "x-json")
	b.ReportMetric(float64(cpu.Microseconds())/1e3/float64(b.N), "cpu-ms")
	if baseCPU > 0 {
		b.ReportMetric(float64(cpu)/float64(b.N)/float64(baseCPU), "x-json-cpu")
	}
}

// BenchmarkChart100kJSONBaseline is the bare encoding/json work alone.
func BenchmarkChart100kJSONBaseline(b *testing.B) {
	req := chartPayload(100_000, 0)
	h := quietServer(b)
	resp, err := http.Post(h.URL+"/v1/call", "application/json", bytes.NewReader(req))
	if err != nil {
		b.Fatal(err)
	}
	raw, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	ans := decodeAnswer(b, raw)
	b.SetBytes(int64(len(req)))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		jsonBaseline(b, req, ans)
	}
}

// BenchmarkDecodeRequests100k: the fast decoder alone on the 100k-row call.
func BenchmarkDecodeRequests100k(b *testing.B) {
	req := chartPayload(100_000, 0)
	b.SetBytes(int64(len(req)))
	for i := 0; i < b.N; i++ {
		if _, _, err := decodeRequests(req, decodeLimits{maxBatch: 10, maxCells: 1 << 30}); err != nil {
			b.Fatal(err)
		}
	}
}

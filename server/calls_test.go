package server

import (
	"encoding/json"
	"fmt"
	"reflect"
	"strconv"
	"strings"
	"testing"
	"time"

	"veer/functions/cell"
	"veer/server/servertest"
)

// callCase is one call and the answer expected from both transports.
type callCase struct {
	name  string
	fn    string
	args  string    // JSON array
	value string    // expected value JSON, or
	code  cell.Code // expected error code
	part  string    // and a part of its message
}

// toyCases cover every toy function: single values, spills, errors and the
// coercion of every kind of cell. Expected values are worked by hand.
var toyCases = []callCase{
	{"add", "VEER.T.ADD", `[2, 3.5]`, `5.5`, "", ""},
	{"add optional omitted", "VEER.T.ADD", `[2]`, `2`, "", ""},
	{"add optional null", "VEER.T.ADD", `[2, null]`, `2`, "", ""},
	{"add 1x1 range", "VEER.T.ADD", `[[[2]], 1]`, `3`, "", ""},
	{"name case-insensitive", "veer.t.add", `[1, 1]`, `2`, "", ""},
	{"mean skips blank and text", "VEER.T.MEAN", `[[1, null, "x", 5]]`, `3`, "", ""},
	{"mean of a block row", "VEER.T.MEAN", `[[[2, 4, 6]]]`, `4`, "", ""},
	{"mean of nothing", "VEER.T.MEAN", `[["a", null]]`, "", "#DIV/0!", "'values' holds no numbers"},
	{"mean propagates #N/A", "VEER.T.MEAN", `[[1, {"error": "#N/A"}]]`, "", "#N/A", "VEER.T.MEAN: argument 'values', row 2: the error #N/A"},
	{"cusum spill", "VEER.T.CUSUM", `[["b","a","a","b"], [2, 3, 1, 1], [1, 2, 1, 0.5], "allowance=0.5"]`, `[[0.5],[2],[0.5],[0]]`, "", ""},
	{"cusum blank value gives #N/A row", "VEER.T.CUSUM", `[["a","a"], [1, 2], [null, 1]]`, `[[{"error":"#N/A","message":"VEER.T.CUSUM: row 1 has no value"}],[0.5]]`, "", ""},
	{"cusum down via options range", "VEER.T.CUSUM", `[["a","a"], [1, 2], [-1, -1], [["side","down"],["allowance",0]]]`, `[[-1],[-2]]`, "", ""},
	{"table spill", "VEER.T.TABLE", `[2]`, `[["i","square"],[1,1],[2,4]]`, "", ""},
	{"echo blank", "VEER.T.ECHO", `[null]`, "", "#VALUE!", "VEER.T.ECHO: argument 'v' is required but blank"},
	{"echo kinds", "VEER.T.ECHO", `[[[1, "a", true, null, {"error": "#div/0!"}]]]`, `[[1,"a",true,null,{"error":"#DIV/0!"}]]`, "", ""},
	{"echo column", "VEER.T.ECHO", `[[1, 2]]`, `[[1],[2]]`, "", ""},
	{"echo escapes", "VEER.T.ECHO", `["line\n\"q\" \u00e9 \ud83d\ude00"]`, `"line\n\"q\" é 😀"`, "", ""},
	{"fail #N/A", "VEER.T.FAIL", `["#N/A", "nothing here"]`, "", "#N/A", "nothing here"},
	{"fail #NUM!", "VEER.T.FAIL", `["#NUM!"]`, "", "#NUM!", "failed on purpose"},
	{"go error is #VALUE!", "VEER.T.FAIL", `["go", "plain Go error"]`, "", "#VALUE!", "plain Go error"},
	{"panic is contained", "VEER.T.PANIC", `[]`, "", "#VALUE!", "VEER.T.PANIC: internal error"},
	{"sneaky save refused", "VEER.T.SNEAK", `["m"]`, "", "#VALUE!", "not declared as writing"},
	{"slow short", "VEER.T.SLOW", `[0.02]`, `0.02`, "", ""},
	{"fit", "VEER.T.FIT", `["toy", [1, 2, 3]]`, `"toy@v1"`, "", ""},
	{"read", "VEER.T.READ", `["toy", 10]`, `8`, "", ""},
	{"read by handle", "VEER.T.READ", `["toy@v1", 2]`, `0`, "", ""},
	// Bad input: each names the argument and has the right kind.
	{"unknown function", "VEER.T.NOPE", `[]`, "", "#NAME?", `unknown function "VEER.T.NOPE"`},
	{"too many args", "VEER.T.ADD", `[1, 2, 3]`, "", "#VALUE!", "VEER.T.ADD: the function takes 1 to 2 arguments (a, [b]); got 3"},
	{"too few args", "VEER.T.ADD", `[]`, "", "#VALUE!", "takes 1 to 2 arguments"},
	{"text for number", "VEER.T.ADD", `["x"]`, "", "#VALUE!", `VEER.T.ADD: argument 'a' must be a number; got text "x"`},
	{"range for number", "VEER.T.ADD", `[[1, 2]]`, "", "#VALUE!", "VEER.T.ADD: argument 'a' must be a single number; got a 2x1 range"},
	{"mismatched lengths", "VEER.T.CUSUM", `[["a","a","a"], [1, 2], [1, 2, 3]]`, "", "#VALUE!", "argument 'times' has 2 rows but argument 'ids' has 3"},
	{"text in numeric range", "VEER.T.CUSUM", `[["a","a"], [1, "two"], [1, 2]]`, "", "#VALUE!", `VEER.T.CUSUM: argument 'times', row 2: expected a number; got text "two"`},
	{"blank in strict range", "VEER.T.FIT", `["m2", [1, null, 3]]`, "", "#VALUE!", "VEER.T.FIT: argument 'values', row 2: expected a number; got a blank cell"},
	{"unknown option", "VEER.T.CUSUM", `[["a"], [1], [1], "side=up; lamda=0.2"]`, "", "#VALUE!", `unknown option "lamda"; known options: side, allowance`},
	{"bad option value", "VEER.T.CUSUM", `[["a"], [1], [1], "allowance=-1"]`, "", "#NUM!", "allowance"},
	{"ragged range", "VEER.T.MEAN", `[[[1, 2], [3]]]`, "", "#VALUE!", "VEER.T.MEAN: argument 'values': the range is not rectangular: row 2 has 1 cells but row 1 has 2"},
	{"rows and cells mixed", "VEER.T.MEAN", `[[[1], 2]]`, "", "#VALUE!", "VEER.T.MEAN: argument 'values': the array mixes rows and single cells"},
	{"too deep", "VEER.T.MEAN", `[[[[1]]]]`, "", "#VALUE!", "arrays nest at most two deep"},
	{"bad cell object", "VEER.T.ECHO", `[{"x": 1}]`, "", "#VALUE!", "VEER.T.ECHO: argument 'v': an object in a cell must be an error value"},
	{"unknown model", "VEER.T.READ", `["nosuch", 1]`, "", "#REF!", `there is no model named "nosuch"`},
	{"unknown version", "VEER.T.READ", `["toy@v9", 1]`, "", "#REF!", `model "toy" has no version 9`},
	{"bad model name", "VEER.T.READ", `["a/b", 1]`, "", "#REF!", "is not a model name"},
	{"whole number", "VEER.T.TABLE", `[1.5]`, "", "#NUM!", "VEER.T.TABLE: argument 'n' must be a whole number from 0 to 1000; got 1.5"},
}

func checkAnswer(t *testing.T, c callCase, a servertest.Answer, via string) {
	t.Helper()
	if c.code != "" {
		if string(a.Code()) != string(c.code) || !strings.Contains(a.Error.Message, c.part) {
			t.Errorf("%s %s: got value %s error %+v; want %s containing %q", via, c.name, a.Value, a.Error, c.code, c.part)
		}
		return
	}
	if a.Error != nil {
		t.Errorf("%s %s: error %+v; want %s", via, c.name, a.Error, c.value)
		return
	}
	var got, want any
	json.Unmarshal(a.Value, &got)
	if err := json.Unmarshal([]byte(c.value), &want); err != nil {
		t.Fatalf("bad expectation %s", c.value)
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("%s %s: got %s; want %s", via, c.name, a.Value, c.value)
	}
}

// TestToyFunctionsHTTPAndWebsocket runs every toy case over HTTP and over the
// websocket, in order (the fit comes before the reads).
func TestToyFunctionsHTTPAndWebsocket(t *testing.T) {
	for _, via := range []string{"http", "ws"} {
		t.Run(via, func(t *testing.T) {
			h := startServer(t, "")
			var ws *servertest.Conn
			if via == "ws" {
				ws = h.Dial()
				ws.Send(map[string]any{"id": 0, "token": h.s.Token()})
				if a := ws.Next(5 * time.Second); string(a.Value) != "true" {
					t.Fatalf("token message answered %+v", a)
				}
			}
			for i, c := range toyCases {
				var a servertest.Answer
				if via == "http" {
					status, b := h.Do("POST", "/v1/call", fmt.Sprintf(`{"fn": %q, "args": %s}`, c.fn, c.args), h.tokenHeader())
					if status != 200 {
						t.Fatalf("%s: status %d: %s", c.name, status, b)
					}
					if err := json.Unmarshal(b, &a); err != nil {
						t.Fatalf("%s: %s: %v", c.name, b, err)
					}
				} else {
					ws.SendRaw([]byte(fmt.Sprintf(`{"id": %d, "fn": %q, "args": %s}`, i+1, c.fn, c.args)))
					a = ws.Next(10 * time.Second)
					if string(a.ID) != strconv.Itoa(i+1) {
						t.Fatalf("%s: answer id %s; want %d", c.name, a.ID, i+1)
					}
				}
				checkAnswer(t, c, a, via)
			}
			// The server keeps serving after all the bad input.
			if st, _ := h.Do("GET", "/v1/health", ""); st != 200 {
				t.Errorf("health after bad input: %d", st)
			}
		})
	}
}

// TestBatchOrder: a batch is answered in order, over HTTP as an array and
// over the websocket as one frame, with a slow call in the middle.
func TestBatchOrder(t *testing.T) {
	h := startServer(t, "")
	const n = 60
	var calls []map[string]any
	for i := 0; i < n; i++ {
		switch i % 4 {
		case 0:
			calls = append(calls, map[string]any{"id": i, "fn": "VEER.T.ADD", "args": []any{i, 1000}})
		case 1:
			calls = append(calls, map[string]any{"id": i, "fn": "VEER.T.FAIL", "args": []any{"#N/A", fmt.Sprint("call ", i)}})
		case 2:
			calls = append(calls, map[string]any{"id": i, "fn": "VEER.T.SLOW", "args": []any{0.01 * float64(n-i) / n, i}})
		case 3:
			calls = append(calls, map[string]any{"id": i, "fn": "VEER.T.NOPE", "args": []any{}})
		}
	}
	check := func(via string, answers []servertest.Answer) {
		if len(answers) != n {
			t.Fatalf("%s: %d answers; want %d", via, len(answers), n)
		}
		for i, a := range answers {
			if string(a.ID) != strconv.Itoa(i) {
				t.Fatalf("%s: answer %d has id %s", via, i, a.ID)
			}
			switch i % 4 {
			case 0:
				if string(a.Value) != strconv.Itoa(i+1000) {
					t.Errorf("%s: answer %d = %s", via, i, a.Value)
				}
			case 1:
				if a.Code() != "#N/A" || a.Error.Message != fmt.Sprint("VEER.T.FAIL: call ", i) {
					t.Errorf("%s: answer %d = %+v", via, i, a.Error)
				}
			case 2:
				if a.Error != nil {
					t.Errorf("%s: answer %d = %+v", via, i, a.Error)
				}
			case 3:
				if a.Code() != "#NAME?" {
					t.Errorf("%s: answer %d = %+v", via, i, a.Error)
				}
			}
		}
	}
	body, _ := json.Marshal(calls)
	status, b := h.Do("POST", "/v1/call", string(body))
	if status != 200 {
		t.Fatalf("status %d: %s", status, b)
	}
	var answers []servertest.Answer
	if err := json.Unmarshal(b, &answers); err != nil {
		t.Fatal(err)
	}
	check("http", answers)

	ws := h.Dial()
	ws.SendRaw(body)
	frame := ws.Read(10 * time.Second)
	answers = nil
	if err := json.Unmarshal(frame, &answers); err != nil {
		t.Fatalf("websocket batch answer is not one array frame: %.200s", frame)
	}
	check("ws", answers)

	// An empty batch is answered by an empty array.
	if status, b := h.Do("POST", "/v1/call", `[]`); status != 200 || strings.TrimSpace(string(b)) != "[]" {
		t.Errorf("empty batch: %d %s", status, b)
	}
	// A non-object inside a batch spoils only its own position.
	status, b = h.Do("POST", "/v1/call", `[{"fn":"VEER.T.ADD","args":[1]}, 7, {"fn":"VEER.T.ADD","args":[2]}]`)
	answers = nil
	json.Unmarshal(b, &answers)
	if status != 200 || len(answers) != 3 || string(answers[0].Value) != "1" || answers[1].Code() != "#VALUE!" || string(answers[2].Value) != "2" {
		t.Errorf("mixed batch: %d %s", status, b)
	}
}

// TestMalformedRequests: input that is not a call gets a transport error
// (HTTP 400 / an error frame) with a clear message, and the server keeps
// serving on the same websocket.
func TestMalformedRequests(t *testing.T) {
	h := startServer(t, "")
	tests := []struct {
		body string
		part string
	}{
		{`{"fn": "VEER.T.ADD", "args": [1,}`, "not valid JSON"},
		{`{"fn": "VEER.T.ADD"} trailing`, "unexpected data after the request"},
		{`"just text"`, "expected a call object"},
		{``, "unexpected end"},
		{`{"fn": "VEER.T.ADD", "args": [1e999]}`, "out of range"},
		{"{\"fn\": \"VEER.T.ADD\", \"args\": [\"\x01\"]}", "control character"},
		{"\xef\xbb\xbf{}", "expected a call object"},
	}
	ws := h.Dial()
	for _, tt := range tests {
		status, b := h.Do("POST", "/v1/call", tt.body)
		var a servertest.Answer
		json.Unmarshal(b, &a)
		if status != 400 || a.Code() != "#VALUE!" || !strings.Contains(a.Error.Message, tt.part) {
			t.Errorf("POST %q: %d %s; want 400 #VALUE! containing %q", tt.body, status, b, tt.part)
		}
		ws.SendRaw([]byte(tt.body))
		a = ws.Next(5 * time.Second)
		if a.Code() != "#VALUE!" || !strings.Contains(a.Error.Message, tt.part) {
			t.Errorf("ws %q: %+v", tt.body, a)
		}
	}
	// Wrong field types are per-call errors.
	for _, body := range []string{`{"fn": 5}`, `{"fn": "VEER.T.ADD", "args": 5}`, `{"id": [1], "fn": "VEER.T.ADD", "args": [1]}`, `{"fn": "VEER.T.ADD", "args": [1], "subscribe": "yes"}`, `{"args": [1]}`} {
		status, b := h.Do("POST", "/v1/call", body)
		var a servertest.Answer
		json.Unmarshal(b, &a)
		if status != 200 || a.Code() != "#VALUE!" {
			t.Errorf("POST %s: %d %s", body, status, b)
		}
	}
	if a := ws.Call(1, "VEER.T.ADD", 1, 2); string(a.Value) != "3" {
		t.Errorf("the websocket stopped serving: %+v", a)
	}
	if st, b := h.Do("GET", "/v1/call", ""); st != 405 {
		t.Errorf("GET /v1/call: %d %s", st, b)
	}
}

// TestFunctionsAndModelsListing checks GET /v1/functions and /v1/models.
func TestFunctionsAndModelsListing(t *testing.T) {
	h := startServer(t, "")
	st, b := h.Do("GET", "/v1/functions", "")
	var l struct {
		Functions []struct {
			Name      string
			Params    []struct{ Name, Type string }
			Writes    bool
			Streaming bool
			Slow      bool
			Result    string
		}
	}
	if err := json.Unmarshal(b, &l); st != 200 || err != nil {
		t.Fatalf("functions: %d %v %s", st, err, b)
	}
	want := toyCatalogue(&toyState{}).Funcs()
	if len(l.Functions) != len(want) {
		t.Fatalf("listing has %d functions; want %d", len(l.Functions), len(want))
	}
	for i, f := range l.Functions {
		if f.Name != want[i].Name || f.Writes != want[i].Writes || f.Streaming != want[i].Streaming || f.Slow != want[i].Slow || f.Result != string(want[i].Result) || len(f.Params) != len(want[i].Params) {
			t.Errorf("listing entry %d = %+v; want %s", i, f, want[i].Name)
		}
	}
	h.Call("VEER.T.FIT", "Lung", []float64{1, 2})
	h.Call("VEER.T.FIT", "lung", []float64{1, 3})
	st, b = h.Do("GET", "/v1/models", "")
	var ml struct{ Models []ModelInfo }
	if err := json.Unmarshal(b, &ml); st != 200 || err != nil || len(ml.Models) != 1 {
		t.Fatalf("models: %d %v %s", st, err, b)
	}
	m := ml.Models[0]
	if m.Name != "Lung" || m.Latest != "Lung@v2" || len(m.Versions) != 2 || m.Versions[0].Handle != "Lung@v1" || m.Versions[0].SHA256 == m.Versions[1].SHA256 {
		t.Errorf("model listing = %+v", m)
	}
}

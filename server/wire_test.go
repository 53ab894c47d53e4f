package server

import (
	"bytes"
	"encoding/json"
	"math"
	"math/rand/v2"
	"reflect"
	"strconv"
	"strings"
	"testing"

	"veer/functions/cell"
)

func TestDecodeRequests(t *testing.T) {
	lim := decodeLimits{maxBatch: 10, maxCells: 100}
	tests := []struct {
		in      string
		batch   bool
		n       int
		syntax  string // part of a whole-frame error
		shape   string // part of the first message's shape error
		shapeAt int    // its argument index (-1: none)
	}{
		{`{"id":1,"fn":"F","args":[1,"a",null,true,{"error":"#N/A"}]}`, false, 1, "", "", 0},
		{` [ {"fn":"F"} , {"fn":"G"} ] `, true, 2, "", "", 0},
		{`[]`, true, 0, "", "", 0},
		{`{"fn":"F","unknown":{"deep":[1,{"x":null}]}}`, false, 1, "", "", 0},
		{`{"fn":"F","args":[[1,2],[[3],[4]]]}`, false, 1, "", "", 0},
		{`{"fn":"F","args":[[[1],[2,3]]]}`, false, 1, "", "not rectangular", 0},
		{`{"fn":"F","args":[1,[1,[2]]]}`, false, 1, "", "mixes single cells and rows", 1},
		{`{"fn":"F","args":[{"error":1}]}`, false, 1, "", "must be an error value", 0},
		{`{"fn":1}`, false, 1, "", `"fn" must be`, -1},
		{`{"fn":"F","id":{}}`, false, 1, "", `"id" must be`, -1},
		{`{"fn":"F","id":"` + strings.Repeat("x", 300) + `"}`, false, 1, "", "longer than 256", -1},
		{`{"fn":"F","args":[` + strings.Repeat("1,", 100) + `1]}`, false, 1, "", "more than 100 cells", -1},
		{`{"fn":"F","args":5,"args":[1]}`, false, 1, "", "", 0}, // last one counts
		{`[` + strings.Repeat(`{},`, 10) + `{}]`, true, 0, "more than 10 calls", "", 0},
		{`{"fn":"F"`, false, 0, "unexpected end", "", 0},
		{`{"fn":"F"}x`, false, 0, "unexpected data", "", 0},
		{`{"fn":"F","args":[01]}`, false, 0, "expected ','", "", 0},
		{`{"fn":"F","args":[1.]}`, false, 0, "invalid number", "", 0},
		{`{"fn":"F","args":[tru]}`, false, 0, "invalid literal", "", 0},
		{`{"fn":"F","args":["\q"]}`, false, 0, "invalid escape", "", 0},
		{`{"fn":"F","x":` + strings.Repeat("[", 70) + strings.Repeat("]", 70) + `}`, false, 0, "nests too deep", "", 0},
		{`5`, false, 0, "expected a call object", "", 0},
	}
	for _, tt := range tests {
		reqs, batch, err := decodeRequests([]byte(tt.in), lim)
		if tt.syntax != "" {
			if err == nil || !strings.Contains(err.Error(), tt.syntax) {
				t.Errorf("%.60s: error %v; want one containing %q", tt.in, err, tt.syntax)
			}
			continue
		}
		if err != nil {
			t.Errorf("%.60s: %v", tt.in, err)
			continue
		}
		if batch != tt.batch || len(reqs) != tt.n {
			t.Errorf("%.60s: batch %v, %d messages", tt.in, batch, len(reqs))
			continue
		}
		if tt.n == 0 {
			continue
		}
		sh := reqs[0].shape
		if tt.shape == "" {
			if sh != nil {
				t.Errorf("%.60s: unexpected shape error %q", tt.in, sh.msg)
			}
			continue
		}
		if sh == nil || !strings.Contains(sh.msg, tt.shape) || sh.arg != tt.shapeAt {
			t.Errorf("%.60s: shape error %+v; want %q at argument %d", tt.in, sh, tt.shape, tt.shapeAt)
		}
	}
	// Escapes and invalid UTF-8 decode as encoding/json does.
	reqs, _, err := decodeRequests([]byte("{\"fn\":\"a\\u00e9\\ud83d\\ude00\\ud800x\\/\xff\"}"), lim)
	var want string
	json.Unmarshal([]byte("\"a\\u00e9\\ud83d\\ude00\\ud800x\\/\xff\""), &want)
	if err != nil || reqs[0].fn != want {
		t.Errorf("string decoding: %q, %v; encoding/json gives %q", reqs[0].fn, err, want)
	}
}

// refDecode is the reference decoder for the fuzz test: encoding/json for
// the syntax and the envelope, cell.Value.UnmarshalJSON for arguments.
type refReq struct {
	id, cancel any
	hasID      bool
	fn, token  string
	subscribe  bool
	args       []cell.Value
	bad        bool
}

func refDecode(data []byte) (reqs []refReq, batch, ok bool) {
	var whole any
	if err := json.Unmarshal(data, &whole); err != nil {
		return nil, false, false
	}
	var msgs []json.RawMessage
	switch whole.(type) {
	case map[string]any:
		msgs = []json.RawMessage{json.RawMessage(data)}
	case []any:
		batch = true
		json.Unmarshal(data, &msgs)
	default:
		return nil, false, false
	}
	for _, m := range msgs {
		var r refReq
		var fields map[string]json.RawMessage
		if err := json.Unmarshal(m, &fields); err != nil {
			reqs = append(reqs, refReq{bad: true})
			continue
		}
		idOf := func(raw json.RawMessage) (any, bool) {
			var v any
			json.Unmarshal(raw, &v)
			switch v.(type) {
			case nil:
				return nil, true
			case float64, string:
				if len(raw) > 256 {
					return nil, false
				}
				return v, true
			}
			return nil, false
		}
		for k, raw := range fields {
			var ok bool
			switch k {
			case "id":
				r.id, ok = idOf(raw)
				r.bad = r.bad || !ok
			case "cancel":
				r.cancel, ok = idOf(raw)
				r.bad = r.bad || !ok
			case "fn":
				r.bad = r.bad || json.Unmarshal(raw, &r.fn) != nil || raw[0] != '"'
			case "token":
				r.bad = r.bad || json.Unmarshal(raw, &r.token) != nil || raw[0] != '"'
			case "subscribe":
				r.bad = r.bad || json.Unmarshal(raw, &r.subscribe) != nil || raw[0] == 'n'
			case "args":
				if string(raw) == "null" {
					continue
				}
				var arr []json.RawMessage
				if raw[0] != '[' || json.Unmarshal(raw, &arr) != nil {
					r.bad = true
					continue
				}
				for _, a := range arr {
					var v cell.Value
					if err := json.Unmarshal(a, &v); err != nil {
						r.bad = true
						break
					}
					r.args = append(r.args, v)
				}
			}
		}
		reqs = append(reqs, r)
	}
	return reqs, batch, true
}

func nestingDepth(b []byte) int {
	d, maxd := 0, 0
	inStr, esc := false, false
	for _, c := range b {
		switch {
		case esc:
			esc = false
		case inStr && c == '\\':
			esc = true
		case c == '"':
			inStr = !inStr
		case !inStr && (c == '[' || c == '{'):
			d++
			maxd = max(maxd, d)
		case !inStr && (c == ']' || c == '}'):
			d--
		}
	}
	return maxd
}

// FuzzDecodeRequests checks the fast request decoder against encoding/json
// and cell.Value.UnmarshalJSON: the same frames are accepted, the same
// messages are bad, and accepted messages decode to the same values.
func FuzzDecodeRequests(f *testing.F) {
	for _, s := range []string{
		`{"id":1,"fn":"VEER.T.ADD","args":[1,2]}`,
		`[{"id":"a","fn":"F","args":[[1,"x"],[null,true]],"subscribe":true},{"cancel":1}]`,
		`{"fn":"F","args":[[[1,2],[3,4]],{"error":"#N/A","message":"m"},"s\u00e9\ud83d\ude00"],"token":"t"}`,
		`{"fn":"F","args":[[1],[[2]]]}`, `{"fn":"F","args":[[[1],[2,3]]]}`, `{"x":[1,{"y":null}],"fn":"F"}`,
		`[1,{"fn":2}]`, `{"fn":"F","args":[-0.5e-3, 1E+2, 0, -0]}`, `{"id":null,"fn":"\ud800"}`,
	} {
		f.Add([]byte(s))
	}
	lim := decodeLimits{maxBatch: 1 << 20, maxCells: 1 << 30}
	f.Fuzz(func(t *testing.T, data []byte) {
		reqs, batch, err := decodeRequests(data, lim)
		if nestingDepth(data) > 60 {
			return // the fast decoder stops deep nesting earlier on purpose
		}
		ref, rbatch, ok := refDecode(data)
		if (err == nil) != ok {
			t.Fatalf("%q: fast decoder error %v; encoding/json ok=%v", data, err, ok)
		}
		if err != nil {
			return
		}
		if batch != rbatch || len(reqs) != len(ref) {
			t.Fatalf("%q: batch %v/%v, %d/%d messages", data, batch, rbatch, len(reqs), len(ref))
		}
		for i, r := range reqs {
			w := ref[i]
			if (r.shape != nil) != w.bad {
				t.Fatalf("%q message %d: fast shape error %+v; reference bad=%v", data, i, r.shape, w.bad)
			}
			if w.bad {
				continue
			}
			if r.fn != w.fn || r.token != w.token || r.subscribe != w.subscribe {
				t.Fatalf("%q message %d: fields %q %q %v; reference %q %q %v", data, i, r.fn, r.token, r.subscribe, w.fn, w.token, w.subscribe)
			}
			for _, p := range [][2]any{{r.id, w.id}, {r.cancel, w.cancel}} {
				raw, want := p[0].([]byte), p[1]
				var got any
				if raw != nil {
					json.Unmarshal(raw, &got)
				}
				if !reflect.DeepEqual(got, want) {
					t.Fatalf("%q message %d: id %s; reference %v", data, i, raw, want)
				}
			}
			if len(r.args) != len(w.args) {
				t.Fatalf("%q message %d: %d args; reference %d", data, i, len(r.args), len(w.args))
			}
			for j := range r.args {
				a, b := r.args[j], w.args[j]
				if a.IsScalar() != b.IsScalar() || !reflect.DeepEqual(a.Rows(), b.Rows()) {
					t.Fatalf("%q message %d arg %d: %v; reference %v", data, i, j, a.Rows(), b.Rows())
				}
			}
		}
		// Answers built from decoded ids are valid JSON.
		for _, r := range reqs {
			if r.id != nil && !json.Valid(appendAnswer(nil, r.id, []byte("1"), nil, false)) {
				t.Fatalf("answer with id %s is not JSON", r.id)
			}
		}
	})
}

func TestAppendAnswer(t *testing.T) {
	tests := []struct {
		got  []byte
		want string
	}{
		{appendAnswer(nil, []byte("7"), []byte("[[1],[2]]"), nil, false), `{"id":7,"value":[[1],[2]]}`},
		{appendAnswer(nil, nil, nil, cell.BlankInput.Errorf("a \"b\""), false), `{"error":{"code":"#N/A","message":"a \"b\""}}`},
		{appendAnswer(nil, []byte(`"x"`), []byte("1"), nil, true), `{"id":"x","value":1,"update":true}`},
		{appendProgress(nil, []byte("3"), 0.41234), `{"id":3,"progress":0.412}`},
		{appendCancelled(nil, []byte("3"), true), `{"id":3,"cancelled":true}`},
	}
	for _, tt := range tests {
		if string(tt.got) != tt.want || !json.Valid(tt.got) {
			t.Errorf("got %s; want %s", tt.got, tt.want)
		}
	}
	if !bytes.Contains(appendAnswer(nil, nil, nil, &cell.Error{Code: "#N/A", Message: "\x00"}, false), []byte(`\u0000`)) {
		t.Error("control character not escaped")
	}
}

// TestNumberParsing compares the decoder's number parsing with
// strconv.ParseFloat (the outside reference) on hand-picked and random
// numbers, bit for bit.
func TestNumberParsing(t *testing.T) {
	cases := []string{"0", "-0", "1", "-1", "0.1", "0.3", "123.456", "1e22", "1e23", "9007199254740993",
		"123456789012345", "1234567890123456", "0.000001", "1.7976931348623157e308", "5e-324", "2.2250738585072014e-308",
		"0.1e-22", "0.00000000000000000000001", "100000000000000000000000", "-2.5E+3", "1E0", "0e10", "-0.0e-5", "4.35", "12.3456789012345",
		"1.0000000000000002", "0.30000000000000004", "8.589973e9"}
	rng := rand.New(rand.NewPCG(3, 4))
	for range 20000 {
		switch rng.IntN(3) {
		case 0:
			cases = append(cases, strconv.FormatFloat(rng.NormFloat64()*math.Pow(10, float64(rng.IntN(40)-20)), 'g', -1, 64))
		case 1:
			cases = append(cases, strconv.FormatFloat(rng.Float64()*1000, 'f', rng.IntN(12), 64))
		default:
			cases = append(cases, strconv.Itoa(rng.IntN(1e9))+"."+strconv.Itoa(rng.IntN(1e9))+"e"+strconv.Itoa(rng.IntN(60)-30))
		}
	}
	for _, c := range cases {
		want, err := strconv.ParseFloat(c, 64)
		if err != nil {
			continue
		}
		d := &decoder{data: []byte(c)}
		got := d.number()
		if math.Float64bits(got) != math.Float64bits(want) || d.pos != len(c) {
			t.Errorf("number(%s) = %v (%x); strconv gives %v (%x)", c, got, math.Float64bits(got), want, math.Float64bits(want))
		}
	}
}

// TestNumberGrammar: forms strconv.ParseFloat accepts but JSON does not
// (RFC 8259) are refused, and so are numbers a float64 cannot hold.
func TestNumberGrammar(t *testing.T) {
	for _, c := range []struct {
		num, want string
	}{
		{"+1", "expected a value"}, {".5", "expected a value"}, {"Inf", "expected a value"}, {"NaN", "expected a value"},
		{"1_000", "expected ','"}, {"0x1p3", "expected ','"}, {"01", "expected ','"}, {"1.", "invalid number"}, {"-", "invalid number"},
		{"1e", "invalid number"}, {"1e+", "invalid number"}, {"-.5", "invalid number"},
		{"1e309", "out of range"}, {"-1e400", "out of range"},
	} {
		_, _, err := decodeRequests([]byte(`{"fn":"VEER.T.ADD","args":[`+c.num+`]}`), decodeLimits{maxBatch: 10, maxCells: 100})
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: err %v; want a syntax error (%s)", c.num, err, c.want)
		}
	}
	for _, ok := range []string{"-0", "0", "1e-400", "2.5E+3", "-0.0e-0"} {
		if _, _, err := decodeRequests([]byte(`{"fn":"VEER.T.ADD","args":[`+ok+`]}`), decodeLimits{maxBatch: 10, maxCells: 100}); err != nil {
			t.Errorf("%s refused: %v", ok, err)
		}
	}
}

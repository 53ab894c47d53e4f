package table

import (
	"bytes"
	"math"
	"strings"
	"testing"
)

func TestReadDelimitersAndErrors(t *testing.T) {
	tests := []struct {
		name, in string
		col      string
		want     []float64
		errPart  string
	}{
		{"comma", "id,age\nA,30.5\nB,41\n", "age", []float64{30.5, 41}, ""},
		{"semicolon decimal comma", "id;age\nA;30,5\nB;41\n", "AGE", []float64{30.5, 41}, ""},
		{"tab", "id\tage\nA\t30\n", "age", []float64{30}, ""},
		{"bom", "\xEF\xBB\xBFid,age\nA,1\n", "age", []float64{1}, ""},
		{"text cell", "id,age\nA,30\nB,old\n", "age", nil, `data row 2 (line 3), column "age": "old" is not a number`},
		{"empty cell", "id,age\nA,\n", "age", nil, "data row 1 (line 2), column \"age\": the cell is empty"},
		{"nan", "id,age\nA,NaN\n", "age", nil, "not a finite number"},
		{"inf", "id,age\nA,+Inf\n", "age", nil, "not a finite number"},
		{"missing column", "id,age\nA,1\n", "weight", nil, `there is no column "weight"; the columns are: "id", "age"`},
		{"ragged", "id,age\nA,1,2\n", "age", nil, "line 2 has a different number of cells"},
		{"empty file", "", "age", nil, "the file is empty"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tb, err := Read(strings.NewReader(tc.in))
			var got []float64
			if err == nil {
				var c int
				c, err = tb.Column(tc.col)
				if err == nil {
					got, err = tb.Floats(c)
				}
			}
			if tc.errPart != "" {
				if err == nil || !strings.Contains(err.Error(), tc.errPart) {
					t.Fatalf("error = %v, want it to contain %q", err, tc.errPart)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if len(got) != len(tc.want) {
				t.Fatalf("got %v want %v", got, tc.want)
			}
			for i := range got {
				if got[i] != tc.want[i] {
					t.Fatalf("got %v want %v", got, tc.want)
				}
			}
		})
	}
}

func TestWriterRoundTrip(t *testing.T) {
	var b bytes.Buffer
	w := NewWriter(&b)
	w.Text(`a "quoted", text`)
	w.Float(1.25, -1)
	w.Float(2, 2)
	w.Text(" padded")
	if err := w.EndRow(); err != nil {
		t.Fatal(err)
	}
	// The writer keeps its place: the next row starts without a comma,
	// and a NaN is an empty field in its place.
	w.Float(math.NaN(), 2)
	w.Text("x")
	w.Float(math.NaN(), -1)
	w.Text("y")
	if err := w.EndRow(); err != nil {
		t.Fatal(err)
	}
	if err := w.Flush(); err != nil {
		t.Fatal(err)
	}
	want := "\"a \"\"quoted\"\", text\",1.25,2.00,\" padded\"\n,x,,y\n"
	if b.String() != want {
		t.Fatalf("got %q want %q", b.String(), want)
	}
	tb, err := Read(strings.NewReader("h1,h2,h3,h4\n" + b.String()))
	if err != nil {
		t.Fatal(err)
	}
	if tb.Rows[0][0] != `a "quoted", text` || tb.Rows[0][3] != " padded" {
		t.Fatalf("round trip lost text: %q", tb.Rows[0])
	}
}

func FuzzRead(f *testing.F) {
	f.Add([]byte("id,age\nA,1\n"))
	f.Add([]byte("id;age\nA;1,5\n"))
	f.Add([]byte("\"a\nb\",c\n1,2\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		tb, err := Read(bytes.NewReader(data))
		if err != nil {
			return
		}
		for _, r := range tb.Rows {
			if len(r) != len(tb.Header) {
				t.Fatalf("row with %d cells, header has %d", len(r), len(tb.Header))
			}
		}
		for c := range tb.Header {
			_, _ = tb.Floats(c)
		}
	})
}

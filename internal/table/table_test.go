package table

import (
	"bytes"
	"errors"
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
		{"text cell", "id,age\nA,30\nB,old\n", "age", nil, `line 3, column "age": "old" is not a number`},
		{"empty cell", "id,age\nA,\n", "age", nil, "line 2, column \"age\": the cell is empty"},
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

// Rows are placed as the user sees them: blank lines and cells spanning
// lines are counted, and a sheet names the cell.
func TestWhere(t *testing.T) {
	tb, err := Read(strings.NewReader("id,age\nA,1\n\n\nB,\"2\"\n\"C\nD\",x\nE,3\n"))
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"line 2", "line 5", "line 6", "line 8"}
	for i, w := range want {
		if got := tb.Where(i, -1); got != w {
			t.Errorf("row %d at %q; want %q", i, got, w)
		}
	}
	if got := tb.Where(3, 1); got != `line 8, column "age"` {
		t.Errorf("cell: %q", got)
	}
	_, err = tb.Floats(1)
	var ce *CellError
	if !errors.As(err, &ce) || ce.Row != 2 || ce.Col != 1 || ce.Line != 6 || ce.Column != "age" {
		t.Errorf("%#v", err)
	}
	sheet := &Table{Header: []string{"id", "age"}, Rows: [][]string{{"A", "1"}, {"B", "x"}}, Line: []int{3, 9}, Sheet: "Exams"}
	if got := sheet.Where(1, 1); got != `cell B9 (column "age")` {
		t.Errorf("sheet cell: %q", got)
	}
	if got := sheet.Where(1, -1); got != "row 9" {
		t.Errorf("sheet row: %q", got)
	}
	if _, err := ParseNumber("  ", false); !errors.Is(err, ErrEmptyCell) {
		t.Errorf("blank cell: %v", err)
	}
}

// Problems lists the first MaxListed in row order and counts the rest.
func TestProblems(t *testing.T) {
	tb := &Table{Header: []string{"id", "age"}}
	for i := 0; i < 30; i++ {
		tb.Rows = append(tb.Rows, []string{"w", "x"})
	}
	var p Problems
	if p.Err() != nil {
		t.Fatal("an empty collection is an error")
	}
	for i := 29; i >= 0; i-- {
		p.Add(tb.CellError(i, 1, ErrEmptyCell))
	}
	msg := p.Err().Error()
	lines := strings.Split(msg, "\n")
	if lines[0] != "30 problems:" || len(lines) != MaxListed+2 || lines[len(lines)-1] != "  and 10 more" {
		t.Fatalf("message:\n%s", msg)
	}
	if lines[1] != `  line 2, column "age": `+ErrEmptyCell.Error() || !strings.HasPrefix(lines[20], "  line 21,") {
		t.Errorf("not in row order:\n%s", msg)
	}
	if !errors.Is(p.Err(), ErrEmptyCell) {
		t.Error("errors.Is does not see the problems")
	}
	var one Problems
	one.Add(tb.CellError(0, -1, ErrEmptyCell))
	if one.Error() != "line 2: "+ErrEmptyCell.Error() {
		t.Errorf("one problem: %q", one.Error())
	}
}

// A file is written back as it came: delimiter, decimal mark, byte-order
// mark and line ends.
func TestFormatRoundTrip(t *testing.T) {
	for _, c := range []struct {
		name, in string
		want     Format
	}{
		{"comma", "id,age\nA,30.5\n", Format{Comma: ','}},
		{"excel europe", "\xEF\xBB\xBFid;age\r\nA;30,5\r\nB;31\r\n", Format{Comma: ';', DecimalComma: true, BOM: true, CRLF: true}},
		{"semicolon, points", "id;age\nA;30.5\n", Format{Comma: ';'}},
		{"semicolon, whole numbers", "id;age\nA;30\n", Format{Comma: ';', DecimalComma: true}},
		{"tab", "id\tage\nA\t30.5\n", Format{Comma: '\t'}},
	} {
		t.Run(c.name, func(t *testing.T) {
			tb, err := Read(strings.NewReader(c.in))
			if err != nil {
				t.Fatal(err)
			}
			if got := tb.Format(); got != c.want {
				t.Fatalf("format %+v; want %+v", got, c.want)
			}
			var b bytes.Buffer
			w := NewFormatWriter(&b, tb.Format())
			w.Text("id")
			w.Text("age")
			w.Text("a;b,c")
			w.EndRow()
			w.Text("A")
			w.Float(30.5, -1)
			w.Float(math.NaN(), 2)
			w.EndRow()
			w.Flush()
			back, err := Read(bytes.NewReader(b.Bytes()))
			if err != nil {
				t.Fatal(err)
			}
			if back.Format() != c.want && !(c.name == "semicolon, whole numbers") {
				t.Errorf("written back as %+v; want %+v:\n%q", back.Format(), c.want, b.String())
			}
			if v, err := back.Floats(1); err != nil || v[0] != 30.5 {
				t.Errorf("number read back: %v %v from %q", v, err, b.String())
			}
			if back.Rows[0][2] != "" || back.Header[2] != "a;b,c" {
				t.Errorf("cells read back: %q %q", back.Header, back.Rows)
			}
		})
	}
}

package cell

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"testing"
)

// The contract: every failure kind has a code veer shows and a meaning;
// the listing's meanings are made from it.
func TestContract(t *testing.T) {
	fs := Failures()
	if len(fs) != int(Busy) {
		t.Fatalf("Failures() has %d kinds; want %d", len(fs), Busy)
	}
	meanings := CodeMeanings()
	for _, f := range fs {
		if f.Meaning() == "" {
			t.Errorf("failure %d has no meaning", f)
		}
		c := f.Code()
		if _, ok := meanings[c]; !ok {
			t.Errorf("failure %q gives %s, which the listing does not explain", f.Meaning(), c)
		}
		if !strings.Contains(meanings[c], f.Meaning()) {
			t.Errorf("the listing's meaning of %s %q does not include %q", c, meanings[c], f.Meaning())
		}
		if e := f.Errorf("x %d", 1); e.Code != c || e.Message != "x 1" {
			t.Errorf("Errorf = %+v", e)
		}
	}
	for c := range meanings {
		if n, ok := NormalizeCode(string(c)); !ok || n != c {
			t.Errorf("listed code %s is not a known spreadsheet code", c)
		}
	}
	// The decisions the team took (PROTOCOL): age outside the reference
	// range #NUM!, unknown group and blank input #N/A, wrong type #VALUE!,
	// unknown model #REF!, overload and cancel #BUSY!.
	for f, want := range map[Failure]Code{
		OutsideReference: CodeNum, UnknownGroup: CodeNA, BlankInput: CodeNA,
		WrongArgument: CodeValue, UnknownModel: CodeRef, Busy: CodeBusy, UnknownFunction: CodeName,
	} {
		if f.Code() != want {
			t.Errorf("%q gives %s; the contract says %s", f.Meaning(), f.Code(), want)
		}
	}
	if Failure(0).Code() != CodeValue || Failure(200).Meaning() != "" {
		t.Error("an unknown failure kind must give #VALUE! and no meaning")
	}
}

func TestHelpFromContract(t *testing.T) {
	row := RowHelp(BlankInput, OutsideReference)
	for _, want := range []string{BlankInput.Meaning() + " gives #N/A", OutsideReference.Meaning() + " gives #NUM!"} {
		if !strings.Contains(row, want) {
			t.Errorf("RowHelp = %q; want it to contain %q", row, want)
		}
	}
	if call := CallHelp(WrongArgument); !strings.Contains(call, "#VALUE! for "+WrongArgument.Meaning()) {
		t.Errorf("CallHelp = %q", call)
	}
}

func TestErrorIn(t *testing.T) {
	e := BlankInput.Errorf("row 3: the age is blank")
	in := e.In("VEER.ZSCORE")
	if in.Message != "VEER.ZSCORE: row 3: the age is blank" || in.Code != CodeNA || in.Func != "VEER.ZSCORE" {
		t.Errorf("In = %+v", in)
	}
	if e.Message != "row 3: the age is blank" || e.Func != "" {
		t.Errorf("In modified the original: %+v", e)
	}
	if again := in.In("VEER.CHART"); again != in {
		t.Errorf("In twice = %+v; want the function named once", again)
	}
	if (*Error)(nil).In("VEER.X") != nil || e.In("") != e {
		t.Error("In of nil or with no function must change nothing")
	}
	if got := Busy.Errorf("").In("VEER.X").Message; got != "VEER.X" {
		t.Errorf("In of an empty message = %q", got)
	}
}

func TestEncodeResultContext(t *testing.T) {
	shared := BlankInput.Errorf("row 2: the age is blank")
	named := OutOfRange.Errorf("bad").In("VEER.OTHER")
	b, e := EncodeResult(nil, "VEER.F", []any{1.0, shared, named, ErrorCell("#DIV/0!")})
	if e != nil {
		t.Fatal(e)
	}
	want := `[[1],[{"error":"#N/A","message":"VEER.F: row 2: the age is blank"}],[{"error":"#NUM!","message":"VEER.OTHER: bad"}],[{"error":"#DIV/0!"}]]`
	if string(b) != want {
		t.Errorf("EncodeResult = %s\nwant %s", b, want)
	}
	if shared.Message != "row 2: the age is blank" {
		t.Errorf("encoding modified a row's error: %q", shared.Message)
	}
	_, e = EncodeResult(nil, "VEER.F", shared)
	if e == nil || e.Message != "VEER.F: row 2: the age is blank" {
		t.Errorf("a failed call's error = %v", e)
	}
}

func TestAsErrorKinds(t *testing.T) {
	tests := []struct {
		err  error
		code Code
	}{
		{context.Canceled, CodeBusy},
		{fmt.Errorf("stopped: %w", context.DeadlineExceeded), CodeBusy},
		{fmt.Errorf("wrapped: %w", UnknownModel.Errorf("gone")), CodeRef},
		{errors.New("outside the reference range"), CodeValue}, // the wording decides nothing
	}
	for _, tt := range tests {
		if got := AsError(tt.err); got.Code != tt.code {
			t.Errorf("AsError(%v) = %v; want %s", tt.err, got, tt.code)
		}
	}
	if AsError(nil) != nil {
		t.Error("AsError(nil) != nil")
	}
}

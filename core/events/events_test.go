package events

import (
	"errors"
	"io"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"runtime"
	"strings"
	"testing"
)

const fixtures = "../../testdata/events"

func open(t *testing.T, name string) io.Reader {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(fixtures, name))
	if err != nil {
		t.Fatal(err)
	}
	return strings.NewReader(string(b))
}

// sameFloats compares with NaN equal to NaN.
func sameFloats(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.IsNaN(a[i]) != math.IsNaN(b[i]) || (!math.IsNaN(a[i]) && a[i] != b[i]) {
			return false
		}
	}
	return true
}

// The expected values below are read off good.tsv by hand; the rules they
// check are the BIDS events conventions of methods n (n/a duration -> 0 with
// a warning, trial_type n/a rows dropped, rows not assumed sorted, blank lines
// skipped, scientific notation accepted).
func TestParseEventsGood(t *testing.T) {
	ev, err := ParseEvents(open(t, "good.tsv"))
	if err != nil {
		t.Fatal(err)
	}
	want := []Event{ // by hand: lines 2, 3, 5, 7 (line 4 blank, line 6 trial_type n/a)
		{Onset: 12, Duration: 2, TrialType: "scrambled", Line: 2},
		{Onset: 2, Duration: 2, TrialType: "naming", Line: 3},
		{Onset: 7.5, Duration: 0, TrialType: "naming", Line: 5},
		{Onset: 22.5, Duration: 2, TrialType: "scrambled", Line: 7},
	}
	if !reflect.DeepEqual(ev.Events, want) {
		t.Errorf("events = %+v\nwant %+v", ev.Events, want)
	}
	if got := ev.Conditions(); !reflect.DeepEqual(got, []string{"scrambled", "naming"}) {
		t.Errorf("Conditions() = %q, want first appearance order [scrambled naming]", got)
	}
	if want := []string{"onset", "duration", "trial_type", "response_time", "stim_file", "value"}; !reflect.DeepEqual(ev.Columns, want) {
		t.Errorf("Columns = %q, want %q", ev.Columns, want)
	}
	nan := math.NaN()
	if got := ev.Numeric["response_time"]; !sameFloats(got, []float64{0.61, 0.83, nan, 0.12}) { // by hand; 1.2E-1 = 0.12
		t.Errorf("response_time = %v", got)
	}
	if got := ev.Numeric["value"]; !sameFloats(got, []float64{1, 3, 2.5, nan}) { // by hand; 2.5e0 = 2.5
		t.Errorf("value = %v", got)
	}
	if _, ok := ev.Numeric["stim_file"]; ok || len(ev.Numeric) != 2 {
		t.Errorf("Numeric keys = %v, want only response_time and value (stim_file is text)", keys(ev.Numeric))
	}
	if len(ev.Warnings) != 2 ||
		!strings.Contains(ev.Warnings[0], "1 row with trial_type n/a ignored (line 6)") ||
		!strings.Contains(ev.Warnings[1], "duration is n/a on 1 row (line 5)") {
		t.Errorf("warnings = %q", ev.Warnings)
	}
}

func keys(m map[string][]float64) []string {
	var k []string
	for n := range m {
		k = append(k, n)
	}
	return k
}

// BOM and CRLF are stripped (methods n); free-text trial_type values keep
// their '-', '.' and ':' characters.
func TestParseEventsBOMCRLF(t *testing.T) {
	ev, err := ParseEvents(open(t, "bom_crlf.tsv"))
	if err != nil {
		t.Fatal(err)
	}
	if ev.Columns[0] != "onset" {
		t.Errorf("first column %q, want onset (BOM stripped)", ev.Columns[0])
	}
	if got := ev.Conditions(); !reflect.DeepEqual(got, []string{"face-up", "face.inverted:1"}) {
		t.Errorf("Conditions() = %q", got)
	}
	if len(ev.Events) != 3 || ev.Events[2].Line != 4 || ev.Events[2].Duration != 1.5 {
		t.Errorf("events = %+v", ev.Events)
	}
	if len(ev.Warnings) != 0 || len(ev.Numeric) != 0 {
		t.Errorf("warnings %q numeric %v, want none", ev.Warnings, ev.Numeric)
	}
}

// Lone \r line ends (old Mac text) are line ends too; an interior blank line
// counts in the numbering.
func TestParseEventsCROnly(t *testing.T) {
	ev, err := ParseEvents(strings.NewReader("onset\tduration\ttrial_type\r1\t2\ta\r\r3e1\t0\tb\r"))
	if err != nil {
		t.Fatal(err)
	}
	want := []Event{{1, 2, "a", 2}, {30, 0, "b", 4}} // by hand
	if !reflect.DeepEqual(ev.Events, want) {
		t.Errorf("events = %+v, want %+v", ev.Events, want)
	}
}

func TestParseEventsErrors(t *testing.T) {
	hdr := "onset\tduration\ttrial_type\n"
	cases := []struct {
		name, file, text string
		want             string // substring of the error
		line             int
		column           string
	}{
		{name: "missing column", file: "bad_missing_column.tsv", want: `missing column "trial_type" (header has: onset, duration, condition)`, line: 1},
		{name: "onset text", file: "bad_onset.tsv", want: `line 4, column "onset": "1.5s" is not a number`, line: 4, column: "onset"},
		{name: "field count", file: "bad_fields.tsv", want: `line 3: 2 fields, want 3`, line: 3},
		{name: "negative duration", file: "bad_negative_duration.tsv", want: `line 2, column "duration": -1 is negative`, line: 2, column: "duration"},
		{name: "space separated", file: "bad_spaces.tsv", want: `the file must be tab-separated`, line: 1},
		{name: "onset Inf", file: "bad_onset_inf.tsv", want: `line 3, column "onset": "Inf" is not a number`, line: 3, column: "onset"},
		{name: "empty file", text: "", want: "empty file"},
		{name: "blank only", text: "\n \n\t\n", want: "empty file"},
		{name: "header only", text: hdr + "\n", want: "no data rows", line: 1},
		{name: "all n/a", text: hdr + "0\t1\tn/a\n", want: "no events left: trial_type is n/a on all 1 data row", column: "trial_type"},
		{name: "empty trial_type", text: hdr + "0\t1\t \n", want: `line 2, column "trial_type": empty`, line: 2, column: "trial_type"},
		{name: "onset n/a", text: hdr + "n/a\t1\ta\n", want: `line 2, column "onset": "n/a" is not a number`, line: 2, column: "onset"},
		{name: "onset NaN", text: hdr + "NaN\t1\ta\n", want: `"NaN" is not a number`, line: 2, column: "onset"},
		{name: "onset hex", text: hdr + "0x10\t1\ta\n", want: `"0x10" is not a number`, line: 2, column: "onset"},
		{name: "onset overflow", text: hdr + "1e400\t1\ta\n", want: `"1e400" is out of range`, line: 2, column: "onset"},
		{name: "duration text", text: hdr + "0\tlong\ta\n", want: `line 2, column "duration": "long" is not a number`, line: 2, column: "duration"},
		{name: "duration empty", text: hdr + "0\t\ta\n", want: `column "duration": "" is not a number`, line: 2, column: "duration"},
		{name: "too many fields", text: hdr + "0\t1\ta\tx\n", want: "line 2: 4 fields, want 3", line: 2},
		{name: "duplicate column", text: "onset\tduration\ttrial_type\tonset\n0\t1\ta\t2\n", want: `column "onset": column name appears twice (fields 1 and 4)`, line: 1, column: "onset"},
		{name: "empty header field", text: "onset\tduration\ttrial_type\t\n0\t1\ta\t\n", want: "header field 4 is empty", line: 1},
		{name: "case", text: "Onset\tduration\ttrial_type\n0\t1\ta\n", want: `rename "Onset" to "onset"`, line: 1},
		{name: "utf16", text: "\xFF\xFEo\x00n\x00", want: "UTF-16", line: 1},
		{name: "invalid utf8", text: hdr + "0\t1\ta\xC3\x28\n", want: "line 2: not valid UTF-8", line: 2},
		{name: "interior blank then error", text: hdr + "\n\n0\t1\n", want: "line 4: 2 fields", line: 4},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var r io.Reader = strings.NewReader(c.text)
			if c.file != "" {
				r = open(t, c.file)
			}
			ev, err := ParseEvents(r)
			if err == nil {
				t.Fatalf("no error, got %+v", ev)
			}
			if !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %q, want it to contain %q", err, c.want)
			}
			var pe *ParseError
			if !errors.As(err, &pe) {
				t.Fatalf("error %T is not a *ParseError", err)
			}
			if pe.Line != c.line || pe.Column != c.column {
				t.Errorf("ParseError line %d column %q, want %d %q", pe.Line, pe.Column, c.line, c.column)
			}
		})
	}
}

// The exact message form of ARCHITECTURE.md's error convention.
func TestParseErrorMessage(t *testing.T) {
	e := &ParseError{Line: 4, Column: "onset", Err: errors.New(`"1.5s" is not a number`)}
	if got, want := e.Error(), `line 4, column "onset": "1.5s" is not a number`; got != want {
		t.Errorf("got %q, want %q", got, want)
	}
}

// Dropped rows are not checked beyond their field count; duration -0 is 0;
// a column that is n/a throughout is not offered as numeric (nothing to use).
func TestParseEventsDroppedAndEmptyColumns(t *testing.T) {
	in := "onset\tduration\ttrial_type\tmod\tallna\n" +
		"junk\tjunk\tn/a\tjunk\tn/a\n" +
		"1\t-0\ta\t\tn/a\n" +
		"2\t1\tb\t4\tn/a\n"
	ev, err := ParseEvents(strings.NewReader(in))
	if err != nil {
		t.Fatal(err)
	}
	if len(ev.Events) != 2 || math.Signbit(ev.Events[0].Duration) {
		t.Errorf("events %+v", ev.Events)
	}
	if got := ev.Numeric["mod"]; !sameFloats(got, []float64{math.NaN(), 4}) { // empty cell = missing
		t.Errorf("mod = %v", got)
	}
	if _, ok := ev.Numeric["allna"]; ok {
		t.Errorf("allna column offered as numeric")
	}
}

func TestParseEventsLongLine(t *testing.T) {
	long := "onset\tduration\ttrial_type\n0\t1\t" + strings.Repeat("x", MaxLineBytes+1) + "\n"
	_, err := ParseEvents(strings.NewReader(long))
	if err == nil || !strings.Contains(err.Error(), "line 2: line is longer than 1 MiB") {
		t.Fatalf("error %v, want line 2 longer than 1 MiB", err)
	}
	// exactly at the limit is fine
	ok := "onset\tduration\ttrial_type\n0\t1\t" + strings.Repeat("x", MaxLineBytes-4) + "\r\n"
	if _, err := ParseEvents(strings.NewReader(ok)); err != nil {
		t.Fatalf("line of exactly MaxLineBytes: %v", err)
	}
}

// rowsReader produces a header and then n copies of row without building the
// whole text in memory.
type rowsReader struct {
	head, row string
	n, pos    int
	buf       string
}

func (r *rowsReader) Read(p []byte) (int, error) {
	k := 0
	for k < len(p) {
		if r.buf == "" {
			switch {
			case r.head != "":
				r.buf, r.head = r.head, ""
			case r.pos < r.n:
				r.buf = r.row
				r.pos++
			default:
				if k == 0 {
					return 0, io.EOF
				}
				return k, nil
			}
		}
		c := copy(p[k:], r.buf)
		r.buf = r.buf[c:]
		k += c
	}
	return k, nil
}

func TestParseEventsTooManyRows(t *testing.T) {
	if testing.Short() || runtime.GOOS == "js" {
		t.Skip("parses a million rows (7 s under WebAssembly); the limit code is the same on every platform")
	}
	r := &rowsReader{head: "onset\tduration\ttrial_type\n", row: "0\t0\tn/a\n", n: MaxRows + 1}
	_, err := ParseEvents(r)
	if err == nil || !strings.Contains(err.Error(), "line 1000002: more than 1000000 data rows") {
		t.Fatalf("error %v, want the row limit at line 1000002", err)
	}
}

package events

import (
	"errors"
	"io"
	"reflect"
	"strings"
	"testing"
)

// Values read off the fixtures by hand. The rule that n/a is allowed in the
// first row only (derivative columns) and becomes 0 is common practice for
// BIDS-derived confounds (methods n).
func TestParseConfoundsGood(t *testing.T) {
	tb, err := ParseConfounds(open(t, "confounds_good.tsv"))
	if err != nil {
		t.Fatal(err)
	}
	if want := []string{"trans_x", "trans_y", "trans_x_derivative1", "framewise_displacement"}; !reflect.DeepEqual(tb.Names, want) {
		t.Errorf("names %q", tb.Names)
	}
	if tb.Rows() != 3 {
		t.Errorf("Rows() = %d, want 3", tb.Rows())
	}
	want := [][]float64{ // by hand
		{0.01, 0.02, 0.015},
		{-0.02, -0.01, 0},
		{0, 0.01, -0.005}, // n/a in row 1 -> 0
		{0, 0.05, 0.03},
	}
	if !reflect.DeepEqual(tb.Columns, want) {
		t.Errorf("columns %v, want %v", tb.Columns, want)
	}
	if len(tb.Warnings) != 1 || !strings.Contains(tb.Warnings[0], "2 columns: trans_x_derivative1, framewise_displacement") {
		t.Errorf("warnings %q", tb.Warnings)
	}

	csv, err := ParseConfounds(open(t, "confounds_good.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(csv.Names, []string{"a", "b", "c"}) || !reflect.DeepEqual(csv.Columns, [][]float64{{1, 4}, {2, 0.5}, {3, 6}}) { // by hand; 5e-1 = 0.5
		t.Errorf("csv: %q %v", csv.Names, csv.Columns)
	}
	if len(csv.Warnings) != 0 {
		t.Errorf("csv warnings %q", csv.Warnings)
	}
}

// A single column needs no separator; values are not mean-centred here.
func TestParseConfoundsSingleColumn(t *testing.T) {
	tb, err := ParseConfounds(strings.NewReader("fd\n\n1\n2\n6\n"))
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(tb.Columns, [][]float64{{1, 2, 6}}) {
		t.Errorf("columns %v, want raw values [1 2 6]", tb.Columns)
	}
	var empty Table
	if empty.Rows() != 0 {
		t.Errorf("empty table Rows() = %d", empty.Rows())
	}
}

func TestParseConfoundsErrors(t *testing.T) {
	cases := []struct {
		name, file, text string
		want             string
		line             int
		column           string
	}{
		{name: "n/a after row 1", file: "confounds_bad_na.tsv", want: `line 4, column "trans_x_derivative1": n/a in data row 3`, line: 4, column: "trans_x_derivative1"},
		{name: "duplicate", file: "confounds_bad_dup.csv", want: `column "a": column name appears twice (fields 1 and 3)`, line: 1, column: "a"},
		{name: "header only", file: "confounds_bad_empty.tsv", want: "no data rows", line: 1},
		{name: "empty", text: "", want: "empty file"},
		{name: "no header", text: "0.1\t0.2\n0.3\t0.4\n", want: "the first row holds numbers", line: 1},
		{name: "space separated", text: "trans_x trans_y\n0 1\n", want: "no tab or comma", line: 1},
		{name: "text cell", text: "a,b\n1,2\n3,x\n", want: `line 3, column "b": "x" is not a number`, line: 3, column: "b"},
		{name: "empty cell later", text: "a,b\n1,2\n3,\n", want: `line 3, column "b": empty cell in data row 2`, line: 3, column: "b"},
		{name: "field count", text: "a\tb\n1\t2\n3\n", want: "line 3: 1 fields, want 2 as in the header (tab-separated)", line: 3},
		{name: "comma in tab file", text: "a\tb\n1\t2\n3,4\t5\n", want: `line 3, column "a": "3,4" is not a number`, line: 3, column: "a"},
		{name: "inf", text: "a\n1e999\n", want: `"1e999" is out of range`, line: 2, column: "a"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var r io.Reader = strings.NewReader(c.text)
			if c.file != "" {
				r = open(t, c.file)
			}
			tb, err := ParseConfounds(r)
			if err == nil {
				t.Fatalf("no error, got %+v", tb)
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

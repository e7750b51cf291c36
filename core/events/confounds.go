package events

import (
	"fmt"
	"io"
	"strings"
)

// Table is a confounds table: one row per volume.
type Table struct {
	Names    []string
	Columns  [][]float64 // Columns[c][row]
	Warnings []string
}

// Rows returns the number of data rows (volumes).
func (t *Table) Rows() int {
	if len(t.Columns) == 0 {
		return 0
	}
	return len(t.Columns[0])
}

// ParseConfounds reads a tab- or comma-separated confounds table (see the
// package comment for the rules). Missing values in the first data row become
// 0; the columns are not mean-centred here.
func ParseConfounds(r io.Reader) (*Table, error) {
	lr := newLineReader(r)
	hdr, hline, err := lr.next()
	if err == io.EOF {
		return nil, &ParseError{Err: fmt.Errorf("empty file; want a header row of column names and one row per volume")}
	}
	if err != nil {
		return nil, err
	}
	var sep byte = '\t'
	sepName := "tab"
	if !strings.Contains(hdr, "\t") && strings.Contains(hdr, ",") {
		sep, sepName = ',', "comma"
	}
	names, n := splitFields(hdr, sep, 0)
	if names == nil {
		return nil, perr(hline, "", "header has %d fields; at most %d are supported", n, MaxColumns)
	}
	if len(names) == 1 && strings.ContainsAny(names[0], " ;") {
		return nil, perr(hline, "", "header %q has no tab or comma; want a tab- or comma-separated table", clip(names[0]))
	}
	if err := checkHeader(names, hline); err != nil {
		return nil, err
	}
	allNumbers := true
	for _, nm := range names {
		if _, err := parseNumber(nm); err != nil {
			allNumbers = false
			break
		}
	}
	if allNumbers {
		return nil, perr(hline, "", "the first row holds numbers (%s); want a header row of column names", clip(hdr))
	}

	t := &Table{Names: names, Columns: make([][]float64, len(names))}
	var firstMissing []string
	rows := 0
	for {
		line, ln, err := lr.next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, err
		}
		rows++
		if rows > MaxRows {
			return nil, perr(ln, "", "more than %d data rows; a confounds table has one row per volume", MaxRows)
		}
		if int64(rows)*int64(len(names)) > MaxCells {
			return nil, perr(ln, "", "more than %d cells; the table is too large", MaxCells)
		}
		f, got := splitFields(line, sep, len(names))
		if f == nil {
			return nil, perr(ln, "", "%d fields, want %d as in the header (%s-separated)", got, len(names), sepName)
		}
		for c, cell := range f {
			var v float64
			if isMissing(cell) {
				if rows != 1 {
					what := "n/a"
					if cell == "" {
						what = "empty cell"
					} else if cell != "n/a" {
						what = cell
					}
					return nil, perr(ln, names[c], "%s in data row %d; want a number (missing values are allowed only in the first row)", what, rows)
				}
				firstMissing = append(firstMissing, names[c])
			} else {
				v, err = parseNumber(cell)
				if err != nil {
					return nil, &ParseError{Line: ln, Column: names[c], Err: err}
				}
			}
			t.Columns[c] = append(t.Columns[c], v)
		}
	}
	if rows == 0 {
		return nil, perr(hline, "", "no data rows; want one row per volume after the header")
	}
	if len(firstMissing) > 0 {
		t.Warnings = append(t.Warnings, fmt.Sprintf("confounds: missing values in the first row set to 0 in %s: %s",
			plural(len(firstMissing), "column"), quotedList(firstMissing)))
	}
	return t, nil
}

// clip shortens s to about 60 bytes for an error message, at a rune boundary.
func clip(s string) string {
	if len(s) <= 60 {
		return s
	}
	for i := range s {
		if i >= 60 {
			return s[:i] + "..."
		}
	}
	return s
}

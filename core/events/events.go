package events

import (
	"fmt"
	"io"
	"math"
	"strings"
)

// Event is one row of an events table.
type Event struct {
	Onset, Duration float64 // seconds
	TrialType       string
	Line            int // 1-based line in the file
}

// Events is a parsed events table.
type Events struct {
	Events   []Event              // file order, rows with trial_type n/a dropped
	Columns  []string             // header names in file order
	Numeric  map[string][]float64 // every other column that is numeric (NaN for n/a), aligned with Events
	Warnings []string
}

// Conditions returns the distinct trial_type values in order of first
// appearance.
func (e *Events) Conditions() []string {
	seen := make(map[string]bool)
	var out []string
	for _, ev := range e.Events {
		if !seen[ev.TrialType] {
			seen[ev.TrialType] = true
			out = append(out, ev.TrialType)
		}
	}
	return out
}

// extraCol tracks whether a non-required column is numeric so far.
type extraCol struct {
	name    string
	field   int
	vals    []float64
	numeric bool
	numbers int // cells that held a number
}

// ParseEvents reads a BIDS-style events table (see the package comment for
// the rules).
func ParseEvents(r io.Reader) (*Events, error) {
	lr := newLineReader(r)
	hdr, hline, err := lr.next()
	if err == io.EOF {
		return nil, &ParseError{Err: fmt.Errorf("empty file; want a tab-separated header row with onset, duration and trial_type")}
	}
	if err != nil {
		return nil, err
	}
	names, n := splitFields(hdr, '\t', 0)
	if names == nil {
		return nil, perr(hline, "", "header has %d fields; at most %d are supported", n, MaxColumns)
	}
	idx := map[string]int{}
	for i, nm := range names {
		if _, ok := idx[nm]; !ok {
			idx[nm] = i
		}
	}
	for _, req := range []string{"onset", "duration", "trial_type"} {
		if _, ok := idx[req]; !ok {
			hint := ""
			if len(names) == 1 && strings.ContainsAny(hdr, " ,;") {
				hint = "; the file must be tab-separated"
			} else {
				for _, nm := range names {
					if strings.EqualFold(nm, req) {
						hint = fmt.Sprintf("; names are case-sensitive: rename %q to %q", nm, req)
					}
				}
			}
			return nil, perr(hline, "", "missing column %q (header has: %s)%s", req, quotedList(names), hint)
		}
	}
	if err := checkHeader(names, hline); err != nil {
		return nil, err
	}
	iOn, iDur, iTT := idx["onset"], idx["duration"], idx["trial_type"]
	var extras []*extraCol
	for i, nm := range names {
		if i != iOn && i != iDur && i != iTT {
			extras = append(extras, &extraCol{name: nm, field: i, numeric: true})
		}
	}

	out := &Events{Columns: names}
	intern := map[string]string{}
	var naDur, naTT []int
	nDur, nTT := 0, 0
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
			return nil, perr(ln, "", "more than %d data rows; an events table is never that long", MaxRows)
		}
		f, got := splitFields(line, '\t', len(names))
		if f == nil {
			return nil, perr(ln, "", "%d fields, want %d as in the header (fields are tab-separated)", got, len(names))
		}
		tt := f[iTT]
		if tt == "n/a" {
			nTT++
			if len(naTT) < 5 {
				naTT = append(naTT, ln)
			}
			continue
		}
		if tt == "" {
			return nil, perr(ln, "trial_type", "empty; want a condition name (or n/a to ignore the row)")
		}
		onset, err := parseNumber(f[iOn])
		if err != nil {
			return nil, &ParseError{Line: ln, Column: "onset", Err: err}
		}
		var dur float64
		if f[iDur] == "n/a" {
			nDur++
			if len(naDur) < 5 {
				naDur = append(naDur, ln)
			}
		} else {
			dur, err = parseNumber(f[iDur])
			if err != nil {
				return nil, &ParseError{Line: ln, Column: "duration", Err: err}
			}
			if dur < 0 {
				return nil, perr(ln, "duration", "%s is negative; want seconds >= 0 (or n/a)", f[iDur])
			}
			dur += 0 // -0 -> 0
		}
		if s, ok := intern[tt]; ok {
			tt = s
		} else {
			intern[tt] = tt
		}
		out.Events = append(out.Events, Event{Onset: onset, Duration: dur, TrialType: tt, Line: ln})
		for _, c := range extras {
			if !c.numeric {
				continue
			}
			cell := f[c.field]
			v := math.NaN()
			if !isMissing(cell) {
				x, err := parseNumber(cell)
				if err != nil {
					c.numeric, c.vals = false, nil
					continue
				}
				v = x
				c.numbers++
			}
			c.vals = append(c.vals, v)
		}
		if cells := int64(len(out.Events)) * int64(len(extras)+3); cells > MaxCells {
			return nil, perr(ln, "", "more than %d cells; the table is too large", MaxCells)
		}
	}
	if rows == 0 {
		return nil, perr(hline, "", "no events: the file has a header row but no data rows")
	}
	if len(out.Events) == 0 {
		return nil, perr(0, "trial_type", "no events left: trial_type is n/a on all %s", plural(rows, "data row"))
	}
	if nTT > 0 {
		out.Warnings = append(out.Warnings, fmt.Sprintf("%s with trial_type n/a ignored (%s)", plural(nTT, "row"), lineList(naTT, nTT)))
	}
	if nDur > 0 {
		out.Warnings = append(out.Warnings, fmt.Sprintf("duration is n/a on %s (%s); treated as 0 s (an impulse)", plural(nDur, "row"), lineList(naDur, nDur)))
	}
	out.Numeric = map[string][]float64{}
	for _, c := range extras {
		if c.numeric && c.numbers > 0 {
			out.Numeric[c.name] = c.vals
		}
	}
	return out, nil
}

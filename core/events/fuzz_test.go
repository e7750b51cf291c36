package events

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"testing"
)

func addSeeds(f *testing.F) {
	ents, err := os.ReadDir(fixtures)
	if err != nil {
		f.Fatal(err)
	}
	for _, e := range ents {
		if e.IsDir() || filepath.Ext(e.Name()) == ".md" {
			continue
		}
		b, err := os.ReadFile(filepath.Join(fixtures, e.Name()))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
	}
}

// FuzzParseEvents checks that no input panics and that every accepted table
// keeps the invariants the package comment promises.
func FuzzParseEvents(f *testing.F) {
	addSeeds(f)
	f.Fuzz(func(t *testing.T, data []byte) {
		ev, err := ParseEvents(bytes.NewReader(data))
		if err != nil {
			if ev != nil {
				t.Fatalf("both a result and an error")
			}
			return
		}
		if len(ev.Events) == 0 {
			t.Fatalf("accepted a table without events")
		}
		last := 0
		for _, e := range ev.Events {
			if math.IsNaN(e.Onset) || math.IsInf(e.Onset, 0) || !(e.Duration >= 0) || math.IsInf(e.Duration, 0) {
				t.Fatalf("bad timing %+v", e)
			}
			if e.TrialType == "" || e.TrialType == "n/a" {
				t.Fatalf("bad trial_type %+v", e)
			}
			if e.Line <= last {
				t.Fatalf("lines not increasing: %d after %d", e.Line, last)
			}
			last = e.Line
		}
		for name, v := range ev.Numeric {
			if len(v) != len(ev.Events) {
				t.Fatalf("Numeric[%q] has %d values for %d events", name, len(v), len(ev.Events))
			}
			if name == "onset" || name == "duration" || name == "trial_type" {
				t.Fatalf("required column %q in Numeric", name)
			}
		}
		seen := map[string]bool{}
		for _, c := range ev.Conditions() {
			if seen[c] {
				t.Fatalf("condition %q twice", c)
			}
			seen[c] = true
		}
	})
}

// FuzzParseConfounds checks that no input panics and that every accepted
// table is rectangular, finite and uniquely named.
func FuzzParseConfounds(f *testing.F) {
	addSeeds(f)
	f.Fuzz(func(t *testing.T, data []byte) {
		tb, err := ParseConfounds(bytes.NewReader(data))
		if err != nil {
			if tb != nil {
				t.Fatalf("both a result and an error")
			}
			return
		}
		if len(tb.Names) != len(tb.Columns) || tb.Rows() == 0 {
			t.Fatalf("%d names, %d columns, %d rows", len(tb.Names), len(tb.Columns), tb.Rows())
		}
		seen := map[string]bool{}
		for c, col := range tb.Columns {
			if seen[tb.Names[c]] || tb.Names[c] == "" {
				t.Fatalf("bad name %q", tb.Names[c])
			}
			seen[tb.Names[c]] = true
			if len(col) != tb.Rows() {
				t.Fatalf("column %d has %d rows, want %d", c, len(col), tb.Rows())
			}
			for _, v := range col {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					t.Fatalf("non-finite value in column %q", tb.Names[c])
				}
			}
		}
	})
}

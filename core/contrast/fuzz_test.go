package contrast

import (
	"math"
	"testing"
)

// FuzzParse checks that no SPEC panics and that every accepted contrast has
// finite weights, one per column, no all-zero row and a valid name.
func FuzzParse(f *testing.F) {
	for _, s := range []string{"d=a - b", "avg=0.5*a+0.5*b-c", "any=a, b", "x=-1/3*a-b-c", "x=a-b-c,c", "x=2 a", "x=a*2", "x==a"} {
		f.Add(s)
	}
	cols := []string{"a", "b", "c", "a-b", "c,d", "1", "intercept"}
	f.Fuzz(func(t *testing.T, spec string) {
		c, err := Parse(spec, cols)
		if err != nil {
			return
		}
		if checkName(c.Name) != nil || len(c.Weights) == 0 || len(c.Rows) != len(c.Weights) {
			t.Fatalf("bad contrast %+v", c)
		}
		for _, w := range c.Weights {
			if len(w) != len(cols) {
				t.Fatalf("%d weights for %d columns", len(w), len(cols))
			}
			zero := true
			for _, x := range w {
				if math.IsNaN(x) || math.IsInf(x, 0) {
					t.Fatalf("non-finite weight in %v", w)
				}
				zero = zero && x == 0
			}
			if zero {
				t.Fatalf("all-zero row accepted: %q", spec)
			}
		}
	})
}

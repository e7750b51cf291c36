package contrast

import (
	"reflect"
	"strings"
	"testing"
)

// Every expected weight vector below is worked out by hand from the SPEC and
// the column list (the grammar is the SPEC syntax of the interface: a weighted
// sum of column names, comma-separated sums for F).
func TestParse(t *testing.T) {
	abc := []string{"a", "b", "c", "intercept"}
	cases := []struct {
		spec string
		cols []string
		name string
		want [][]float64
	}{
		{"naming-scrambled=naming - scrambled", []string{"naming", "scrambled", "drift1", "intercept"}, "naming-scrambled", [][]float64{{1, -1, 0, 0}}},
		{"d=a-b", abc, "d", [][]float64{{1, -1, 0, 0}}},
		{" d = a  -b ", abc, "d", [][]float64{{1, -1, 0, 0}}},
		{"avg=0.5*a + 0.5*b - c", abc, "avg", [][]float64{{0.5, 0.5, -1, 0}}},
		{"avg=0.5*a+0.5*b-c", abc, "avg", [][]float64{{0.5, 0.5, -1, 0}}},
		{"neg=-a", abc, "neg", [][]float64{{-1, 0, 0, 0}}},
		{"pos=+a", abc, "pos", [][]float64{{1, 0, 0, 0}}},
		{"w=-0.5 * a - 2e-1*b + .25*c", abc, "w", [][]float64{{-0.5, -0.2, 0.25, 0}}},
		{"third=1/3*a + 1/3*b + 1/3*c", abc, "third", [][]float64{{1.0 / 3, 1.0 / 3, 1.0 / 3, 0}}},
		{"twice=2*a", abc, "twice", [][]float64{{2, 0, 0, 0}}},
		{"zero-weight=0*a + b", abc, "zero-weight", [][]float64{{0, 1, 0, 0}}},
		// repeated names are merged (weights added)
		{"m=0.5*a + 0.5*a - b", abc, "m", [][]float64{{1, -1, 0, 0}}},
		{"m2=a + a", abc, "m2", [][]float64{{2, 0, 0, 0}}},
		// F contrasts
		{"any=a, b", abc, "any", [][]float64{{1, 0, 0, 0}, {0, 1, 0, 0}}},
		{"eff=a - b,b - c , a+c", abc, "eff", [][]float64{{1, -1, 0, 0}, {0, 1, -1, 0}, {1, 0, 1, 0}}},
		// free-text names: longest known name first, then '-' as an operator
		{"x=face-up - face", []string{"face", "up", "face-up"}, "x", [][]float64{{-1, 0, 1}}},
		{"x=face-up", []string{"face", "up", "face-up"}, "x", [][]float64{{0, 0, 1}}},
		{"x=face - up", []string{"face", "up", "face-up"}, "x", [][]float64{{1, -1, 0}}},
		{"x=face-upx-up", []string{"face", "up", "face-up", "upx"}, "x", [][]float64{{1, -1, 0, -1}}}, // face - upx - up
		{"x=cond.1:a-cond.2:a", []string{"cond.1:a", "cond.2:a"}, "x", [][]float64{{1, -1}}},
		{"x=go left - go right", []string{"go left", "go right", "go"}, "x", [][]float64{{1, -1, 0}}},
		{"x=-neg - pos", []string{"-neg", "neg", "pos"}, "x", [][]float64{{1, 0, -1}}},
		{"x=1 - 2", []string{"1", "2"}, "x", [][]float64{{1, -1}}},
		{"x=2*1 + 0.5*2back", []string{"1", "2back"}, "x", [][]float64{{2, 0.5}}},
		{"x=a,b - c", []string{"a,b", "c"}, "x", [][]float64{{1, -1}}},
		{"A.b_c+D-9=A", []string{"A"}, "A.b_c+D-9", [][]float64{{1}}},
		{"x==a", []string{"=a"}, "x", [][]float64{{1}}},
	}
	for _, c := range cases {
		got, err := Parse(c.spec, c.cols)
		if err != nil {
			t.Errorf("Parse(%q): %v", c.spec, err)
			continue
		}
		if got.Name != c.name || !reflect.DeepEqual(got.Weights, c.want) {
			t.Errorf("Parse(%q) = %q %v, want %q %v", c.spec, got.Name, got.Weights, c.name, c.want)
		}
		if got.IsF() != (len(c.want) > 1) {
			t.Errorf("Parse(%q).IsF() = %v", c.spec, got.IsF())
		}
		if len(got.Rows) != len(c.want) || !reflect.DeepEqual(got.Columns, c.cols) {
			t.Errorf("Parse(%q): rows %q columns %q", c.spec, got.Rows, got.Columns)
		}
	}
}

func TestParseRowsText(t *testing.T) {
	c, err := Parse("any= a - b ,  c", []string{"a", "b", "c"})
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(c.Rows, []string{"a - b", "c"}) {
		t.Errorf("Rows = %q", c.Rows)
	}
}

func TestParseErrors(t *testing.T) {
	abc := []string{"a", "b", "c", "intercept"}
	cases := []struct {
		spec string
		cols []string
		want string
	}{
		{"a - b", abc, `missing "="`},
		{"=a - b", abc, "empty contrast name"},
		{"  =a", abc, "empty contrast name"},
		{"a b=a - b", abc, `contrast name "a b" contains ' '; use only letters A-Z a-z, digits and . _ + -`},
		{"a/b=a - b", abc, `contains '/'`},
		{"Ä=a", abc, `contains 'Ä'`},
		{".hidden=a", abc, "starts with '.'"},
		{strings.Repeat("n", 101) + "=a", abc, "101 characters long; at most 100"},
		{"x=", abc, `empty expression after "x="`},
		{"x=   ", abc, `empty expression after "x="`},
		{"a-b=a - d", abc, `"d" is not a design column (have: a, b, c, intercept)`},
		{"x=A - b", abc, `"A" is not a design column (have: a, b, c, intercept); names are case-sensitive: did you mean "a"?`},
		{"x=faces - houses", []string{"face", "houses"}, `"faces" is not a design column`},
		{"x=a - 2", abc, "weight 2 is not followed by a column name"},
		{"x=2", abc, "weight 2 is not followed by a column name"},
		{"x=2 a", abc, `want '*' between the weight 2 and "a", e.g. "2*a"`},
		{"x=2a", abc, `"2a" is not a design column`},
		{"x=a*2", abc, `unexpected "*" after "a"; write the weight before the name, e.g. "2*a"`},
		{"x=2*", abc, "weight 2* is not followed by a column name"},
		{"x=2*d", abc, `"d" is not a design column`},
		{"x=a - a", abc, `the expression ("a - a") has all weights zero`},
		{"x=0*a", abc, `("0*a") has all weights zero`},
		{"x=a, b - b", abc, `row 2 ("b - b") has all weights zero`},
		{"x=a,,b", abc, "row 2 of the F contrast is empty"},
		{"x=a,", abc, "row 2 of the F contrast is empty"},
		{"x=,a", abc, "row 1 of the F contrast is empty"},
		{"x=a -", abc, `"a -" ends with an operator`},
		{"x=a - , b", abc, `"a -" ends with an operator`},
		{"x=-", abc, `"-" ends with an operator`},
		{"x=a + - b", abc, "two signs in a row"},
		{"x=--a", abc, "two signs in a row"},
		{"x=a b", abc, `unexpected "b" after "a"; want +, - or ,`},
		{"x=1e999*a", abc, `weight "1e999" is out of range`},
		{"x=1/0*a", abc, `weight "1/0" divides by zero`},
		{"x=1/1e-320*a", abc, `weight "1/1e-320" is out of range`},
		{"x=1e308*a + 1e308*a", abc, `the weights of "a" add up to more than the largest number`},
		{"x=1/*a", abc, "want a number after '/'"},
		{"x=a", []string{"a", "b", "a"}, `design column "a" appears twice`},
		{"x=a # b", abc, `unexpected "#" after "a"`},
		{"x=a − b", abc, "type the ASCII minus '-'"},
		{"x=2**a", abc, `unexpected "*"; want WEIGHT*NAME`},
		{"x=-2*-a", abc, `a sign after "2*"; put the sign before the weight`},
		{"x=face-upp", []string{"face", "face-up"}, `"upp" is not a design column`}, // face, minus, upp
		{"x=(a)", abc, `"(a)" is not a design column`},
		{"x=facs-up", []string{"face", "face-up"}, `"facs-up" is not a design column`},
	}
	for _, c := range cases {
		got, err := Parse(c.spec, c.cols)
		if err == nil {
			t.Errorf("Parse(%q) = %+v, want an error containing %q", c.spec, got, c.want)
			continue
		}
		if !strings.Contains(err.Error(), c.want) {
			t.Errorf("Parse(%q) error %q, want it to contain %q", c.spec, err, c.want)
		}
	}
}

// The list of valid names is capped for long designs.
func TestParseUnknownListCapped(t *testing.T) {
	var cols []string
	for i := 0; i < 25; i++ {
		cols = append(cols, "c"+strings.Repeat("x", i))
	}
	_, err := Parse("x=zz", cols)
	if err == nil || !strings.Contains(err.Error(), ", ... (5 more))") {
		t.Errorf("error %v, want the list cut after 20 names with (5 more)", err)
	}
}

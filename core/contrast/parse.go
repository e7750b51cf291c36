package contrast

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// Contrast is a parsed contrast: one row of weights is a t contrast, several
// rows an F contrast.
type Contrast struct {
	Name    string
	Weights [][]float64 // rows x design columns; one row: t contrast, several: F
	Rows    []string    // the text of each row as written (trimmed), for messages
	Columns []string    // the design column names the weights refer to
}

// IsF reports whether the contrast has more than one row (an F contrast).
func (c *Contrast) IsF() bool { return len(c.Weights) > 1 }

// MaxNameLen is the longest contrast NAME accepted.
const MaxNameLen = 100

// Parse reads a SPEC "NAME=EXPR[, EXPR...]" against the design column names
// (see the package comment for the grammar). Errors do not repeat the SPEC;
// the caller adds it.
func Parse(spec string, columns []string) (*Contrast, error) {
	eq := strings.IndexByte(spec, '=')
	if eq < 0 {
		return nil, errors.New(`missing "=": want NAME=EXPR, e.g. "a-b=a - b"`)
	}
	name := strings.TrimSpace(spec[:eq])
	if err := checkName(name); err != nil {
		return nil, err
	}
	expr := spec[eq+1:]
	if strings.TrimSpace(expr) == "" {
		return nil, fmt.Errorf(`empty expression after "%s="; want a weighted sum of design columns, e.g. "%s=a - b"`, name, name)
	}
	seen := make(map[string]bool, len(columns))
	index := make(map[string]int, len(columns))
	for j, col := range columns {
		if seen[col] {
			return nil, fmt.Errorf("design column %q appears twice; column names must be unique", col)
		}
		seen[col] = true
		if col != "" {
			index[col] = j
		}
	}
	p := &parser{s: expr, columns: columns, index: index}
	c := &Contrast{Name: name, Columns: append([]string(nil), columns...)}
	for rowNo := 1; ; rowNo++ {
		w, text, err := p.sum(rowNo)
		if err != nil {
			return nil, err
		}
		c.Weights = append(c.Weights, w)
		c.Rows = append(c.Rows, text)
		if p.i >= len(p.s) {
			break
		}
		p.i++ // the ','
	}
	return c, nil
}

func checkName(name string) error {
	if name == "" {
		return errors.New(`empty contrast name before "="; want NAME=EXPR, e.g. "a-b=a - b"`)
	}
	if len(name) > MaxNameLen {
		return fmt.Errorf("contrast name is %d characters long; at most %d are allowed", len(name), MaxNameLen)
	}
	for _, r := range name {
		ok := r >= 'A' && r <= 'Z' || r >= 'a' && r <= 'z' || r >= '0' && r <= '9' ||
			r == '.' || r == '_' || r == '+' || r == '-'
		if !ok {
			return fmt.Errorf("contrast name %q contains %q; use only letters A-Z a-z, digits and . _ + - (the name starts output file names)", name, r)
		}
	}
	if name[0] == '.' {
		return fmt.Errorf("contrast name %q starts with '.'; it starts output file names, which would be hidden", name)
	}
	return nil
}

type parser struct {
	s       string
	i       int
	columns []string
	index   map[string]int
}

func isSpace(b byte) bool {
	return b == ' ' || b == '\t' || b == '\n' || b == '\r' || b == '\v' || b == '\f'
}

func (p *parser) skipSpace() {
	for p.i < len(p.s) && isSpace(p.s[p.i]) {
		p.i++
	}
}

// boundary reports whether a name may end at position k.
func (p *parser) boundary(k int) bool {
	if k >= len(p.s) {
		return true
	}
	switch b := p.s[k]; b {
	case '+', '-', ',':
		return true
	default:
		return isSpace(b)
	}
}

// name matches the longest design column name at the current position that
// ends at a boundary; -1 if none.
func (p *parser) name() int {
	best, bestLen := -1, 0
	rest := p.s[p.i:]
	for j, col := range p.columns {
		if col == "" || len(col) <= bestLen || !strings.HasPrefix(rest, col) || !p.boundary(p.i+len(col)) {
			continue
		}
		best, bestLen = j, len(col)
	}
	if best >= 0 {
		p.i += bestLen
	}
	return best
}

// digits consumes decimal digits and returns how many.
func (p *parser) digits() int {
	k := p.i
	for p.i < len(p.s) && p.s[p.i] >= '0' && p.s[p.i] <= '9' {
		p.i++
	}
	return p.i - k
}

// decimal consumes an unsigned decimal number; "" if none.
func (p *parser) decimal() string {
	start := p.i
	n := p.digits()
	if p.i < len(p.s) && p.s[p.i] == '.' {
		p.i++
		n += p.digits()
	}
	if n == 0 {
		p.i = start
		return ""
	}
	if p.i < len(p.s) && (p.s[p.i] == 'e' || p.s[p.i] == 'E') {
		save := p.i
		p.i++
		if p.i < len(p.s) && (p.s[p.i] == '+' || p.s[p.i] == '-') {
			p.i++
		}
		if p.digits() == 0 {
			p.i = save
		}
	}
	return p.s[start:p.i]
}

// weight consumes "NUMBER" or "NUMBER/NUMBER"; ok false if no number starts here.
func (p *parser) weight() (v float64, text string, ok bool, err error) {
	start := p.i
	num := p.decimal()
	if num == "" {
		return 0, "", false, nil
	}
	v, err = parseFloat(num)
	if err != nil {
		return 0, "", true, err
	}
	if p.i < len(p.s) && p.s[p.i] == '/' {
		p.i++
		den := p.decimal()
		if den == "" {
			return 0, "", true, fmt.Errorf("%q: want a number after '/'", p.s[start:p.i])
		}
		d, err := parseFloat(den)
		if err != nil {
			return 0, "", true, err
		}
		if d == 0 {
			return 0, "", true, fmt.Errorf("weight %q divides by zero", p.s[start:p.i])
		}
		v /= d
		if math.IsInf(v, 0) {
			return 0, "", true, fmt.Errorf("weight %q is out of range; want a finite number", p.s[start:p.i])
		}
	}
	return v, p.s[start:p.i], true, nil
}

func parseFloat(s string) (float64, error) {
	v, err := strconv.ParseFloat(s, 64)
	if math.IsInf(v, 0) || math.IsNaN(v) || (err != nil && !errors.Is(err, strconv.ErrRange)) {
		return 0, fmt.Errorf("weight %q is out of range; want a finite number", s)
	}
	return v, nil
}

// word returns the text from the current position up to white space, '+',
// ',' or '*' (names may hold '-'), for messages.
func (p *parser) word() string {
	k := p.i
	for k < len(p.s) && !isSpace(p.s[k]) && !strings.ContainsRune("+,*", rune(p.s[k])) {
		k++
	}
	if k == p.i && k < len(p.s) {
		k++
	}
	return p.s[p.i:k]
}

func (p *parser) unknown(w string) error {
	if w == "*" {
		return errors.New(`unexpected "*"; want WEIGHT*NAME, e.g. "2*a"`)
	}
	if _, ok := p.index[w]; ok {
		return fmt.Errorf("unexpected %q after %q; write the weight before the name, e.g. \"2*%s\"", p.s[p.i+len(w):min(len(p.s), p.i+len(w)+1)], w, w)
	}
	hint := ""
	for _, col := range p.columns {
		if strings.EqualFold(col, w) {
			hint = fmt.Sprintf("; names are case-sensitive: did you mean %q?", col)
			break
		}
	}
	return fmt.Errorf("%q is not a design column (have: %s)%s", w, list(p.columns), hint)
}

func list(cols []string) string {
	const show = 20
	var b strings.Builder
	for i, c := range cols {
		if i == show {
			fmt.Fprintf(&b, ", ... (%d more)", len(cols)-show)
			break
		}
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(c)
	}
	return b.String()
}

// sum parses one comma-free weighted sum, stopping at ',' or the end.
func (p *parser) sum(rowNo int) ([]float64, string, error) {
	start := p.i
	w := make([]float64, len(p.columns))
	terms := 0
	rowLabel := func() string {
		if rowNo == 1 && !strings.Contains(p.s[p.i:], ",") {
			return "the expression"
		}
		return fmt.Sprintf("row %d", rowNo)
	}
	for {
		p.skipSpace()
		atEnd := p.i >= len(p.s) || p.s[p.i] == ','
		sign := 1.0
		if terms > 0 {
			if atEnd {
				break
			}
			switch p.s[p.i] {
			case '+':
			case '-':
				sign = -1
			default:
				hint := ""
				if strings.HasPrefix(p.s[p.i:], "−") || strings.HasPrefix(p.s[p.i:], "–") {
					hint = " (type the ASCII minus '-')"
				}
				return nil, "", fmt.Errorf("unexpected %q after %q; want +, - or , between terms%s", p.word(), strings.TrimSpace(p.s[start:p.i]), hint)
			}
			p.i++
			p.skipSpace()
			if p.i >= len(p.s) || p.s[p.i] == ',' {
				return nil, "", fmt.Errorf("%q ends with an operator; want a column name after it", strings.TrimSpace(p.s[start:p.i]))
			}
		} else if atEnd {
			if rowNo == 1 && p.i >= len(p.s) {
				return nil, "", errors.New("empty expression; want a weighted sum of design columns")
			}
			return nil, "", fmt.Errorf("row %d of the F contrast is empty (a stray \",\"?)", rowNo)
		}
		// A term: a name first (names may start with '-', '+' or a digit).
		if j := p.name(); j >= 0 {
			w[j] += sign
			terms++
			continue
		}
		if terms == 0 && (p.s[p.i] == '+' || p.s[p.i] == '-') {
			if p.s[p.i] == '-' {
				sign = -1
			}
			p.i++
			p.skipSpace()
			if j := p.name(); j >= 0 {
				w[j] += sign
				terms++
				continue
			}
		}
		if p.i >= len(p.s) || p.s[p.i] == ',' {
			return nil, "", fmt.Errorf("%q ends with an operator; want a column name after it", strings.TrimSpace(p.s[start:p.i]))
		}
		if p.s[p.i] == '+' || p.s[p.i] == '-' {
			return nil, "", fmt.Errorf("two signs in a row in %q; write one sign per term", strings.TrimSpace(p.s[start:p.i+1]))
		}
		wStart := p.i
		v, wtext, isNum, err := p.weight()
		if err != nil {
			return nil, "", err
		}
		if !isNum {
			return nil, "", p.unknown(p.word())
		}
		if p.i < len(p.s) && !isSpace(p.s[p.i]) && !strings.ContainsRune("*+-,", rune(p.s[p.i])) {
			p.i = wStart // "2bak": a misspelt name rather than a weight
			return nil, "", p.unknown(p.word())
		}
		p.skipSpace()
		if p.i >= len(p.s) || p.s[p.i] == ',' || p.s[p.i] == '+' || p.s[p.i] == '-' {
			return nil, "", fmt.Errorf("weight %s is not followed by a column name; want e.g. \"%s*name\"", wtext, wtext)
		}
		if p.s[p.i] != '*' {
			return nil, "", fmt.Errorf("want '*' between the weight %s and %q, e.g. \"%s*%s\"", wtext, p.word(), wtext, p.word())
		}
		p.i++
		p.skipSpace()
		j := p.name()
		if j < 0 {
			if p.i < len(p.s) && (p.s[p.i] == '-' || p.s[p.i] == '+') {
				return nil, "", fmt.Errorf("a sign after \"%s*\"; put the sign before the weight, e.g. \"-%s*name\"", wtext, wtext)
			}
			if p.i >= len(p.s) || p.s[p.i] == ',' {
				return nil, "", fmt.Errorf("weight %s* is not followed by a column name", wtext)
			}
			return nil, "", p.unknown(p.word())
		}
		w[j] += sign * v
		terms++
	}
	text := strings.TrimSpace(p.s[start:p.i])
	zero := true
	for j, x := range w {
		if math.IsInf(x, 0) || math.IsNaN(x) {
			return nil, "", fmt.Errorf("%s (%q): the weights of %q add up to more than the largest number", rowLabel(), text, p.columns[j])
		}
		if x != 0 {
			zero = false
			break
		}
	}
	if zero {
		return nil, "", fmt.Errorf("%s (%q) has all weights zero once repeated names are added up; want at least one non-zero weight", rowLabel(), text)
	}
	return w, text, nil
}

package events

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"unicode/utf8"
)

// Limits checked while reading, before anything large is allocated.
const (
	MaxRows      = 1_000_000  // data rows (blank lines not counted)
	MaxLineBytes = 1 << 20    // bytes in one line, without its line end
	MaxColumns   = 10_000     // header fields
	MaxCells     = 20_000_000 // numeric cells kept in memory (rows x numeric columns)
	MaxBytes     = 256 << 20  // bytes in the whole file
)

// ParseError locates a problem in a table: `line 4, column "onset": "1.5s" is
// not a number`. Line is 1-based (0 when the problem is not on one line),
// Column is the header name ("" when the problem is not in one column).
type ParseError struct {
	Line   int
	Column string
	Err    error
}

func (e *ParseError) Error() string {
	var b strings.Builder
	if e.Line > 0 {
		fmt.Fprintf(&b, "line %d", e.Line)
	}
	if e.Column != "" {
		if b.Len() > 0 {
			b.WriteString(", ")
		}
		fmt.Fprintf(&b, "column %q", e.Column)
	}
	if b.Len() > 0 {
		b.WriteString(": ")
	}
	if e.Err != nil {
		b.WriteString(e.Err.Error())
	} else {
		b.WriteString("invalid table")
	}
	return b.String()
}

func (e *ParseError) Unwrap() error { return e.Err }

func perr(line int, col string, format string, args ...any) *ParseError {
	return &ParseError{Line: line, Column: col, Err: fmt.Errorf(format, args...)}
}

var errTooBig = fmt.Errorf("file is larger than %d MiB; a timing or confounds table is never that large", MaxBytes>>20)

// capReader fails once more than MaxBytes have been read.
type capReader struct {
	r io.Reader
	n int64
}

func (c *capReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += int64(n)
	if c.n > MaxBytes {
		return n, errTooBig
	}
	return n, err
}

// splitLines is a bufio.SplitFunc for \n, \r\n and lone \r line ends.
func splitLines(data []byte, atEOF bool) (int, []byte, error) {
	if atEOF && len(data) == 0 {
		return 0, nil, nil
	}
	if i := bytes.IndexAny(data, "\r\n"); i >= 0 {
		if data[i] == '\n' {
			return i + 1, data[:i], nil
		}
		if i+1 < len(data) {
			if data[i+1] == '\n' {
				return i + 2, data[:i], nil
			}
			return i + 1, data[:i], nil
		}
		if atEOF {
			return i + 1, data[:i], nil
		}
		return 0, nil, nil // a \r at the end of the buffer: is a \n next?
	}
	if atEOF {
		return len(data), data, nil
	}
	return 0, nil, nil
}

// lineReader yields the non-blank lines of a table with their 1-based line
// numbers, the byte-order mark stripped.
type lineReader struct {
	sc   *bufio.Scanner
	line int
}

func newLineReader(r io.Reader) *lineReader {
	sc := bufio.NewScanner(&capReader{r: r})
	sc.Buffer(make([]byte, 0, 4096), MaxLineBytes+2)
	sc.Split(splitLines)
	return &lineReader{sc: sc}
}

// next returns the next non-blank line and its number, or io.EOF.
func (lr *lineReader) next() (string, int, error) {
	for lr.sc.Scan() {
		lr.line++
		b := lr.sc.Bytes()
		if lr.line == 1 {
			if len(b) >= 2 && ((b[0] == 0xFF && b[1] == 0xFE) || (b[0] == 0xFE && b[1] == 0xFF)) {
				return "", lr.line, perr(1, "", "the file is UTF-16 text; want UTF-8 (save it as UTF-8)")
			}
			b = bytes.TrimPrefix(b, []byte("\xEF\xBB\xBF"))
		}
		if len(b) > MaxLineBytes {
			return "", lr.line, perr(lr.line, "", "line is longer than %d MiB", MaxLineBytes>>20)
		}
		if len(bytes.TrimSpace(b)) == 0 {
			continue
		}
		if !utf8.Valid(b) {
			return "", lr.line, perr(lr.line, "", "not valid UTF-8 text; want a UTF-8 text file")
		}
		return string(b), lr.line, nil
	}
	err := lr.sc.Err()
	switch {
	case err == nil:
		return "", lr.line, io.EOF
	case errors.Is(err, bufio.ErrTooLong):
		return "", lr.line + 1, perr(lr.line+1, "", "line is longer than %d MiB", MaxLineBytes>>20)
	case errors.Is(err, errTooBig):
		return "", lr.line + 1, &ParseError{Err: errTooBig}
	default:
		return "", lr.line + 1, err
	}
}

// splitFields splits a line at sep, trimming white space around each field.
// want > 0 checks the field count before allocating.
func splitFields(line string, sep byte, want int) ([]string, int) {
	n := strings.Count(line, string(sep)) + 1
	if want > 0 && n != want {
		return nil, n
	}
	if n > MaxColumns {
		return nil, n
	}
	f := strings.Split(line, string(sep))
	for i := range f {
		f[i] = strings.TrimSpace(f[i])
	}
	return f, n
}

// isDecimal reports whether s is a plain decimal number:
// [+-] (digits [. [digits]] | . digits) [(e|E) [+-] digits].
func isDecimal(s string) bool {
	i := 0
	if i < len(s) && (s[i] == '+' || s[i] == '-') {
		i++
	}
	digits := 0
	for i < len(s) && s[i] >= '0' && s[i] <= '9' {
		i++
		digits++
	}
	if i < len(s) && s[i] == '.' {
		i++
		for i < len(s) && s[i] >= '0' && s[i] <= '9' {
			i++
			digits++
		}
	}
	if digits == 0 {
		return false
	}
	if i < len(s) && (s[i] == 'e' || s[i] == 'E') {
		i++
		if i < len(s) && (s[i] == '+' || s[i] == '-') {
			i++
		}
		ed := 0
		for i < len(s) && s[i] >= '0' && s[i] <= '9' {
			i++
			ed++
		}
		if ed == 0 {
			return false
		}
	}
	return i == len(s)
}

// parseNumber parses a finite decimal number; the error text completes
// `"x" ...`.
func parseNumber(s string) (float64, error) {
	if !isDecimal(s) {
		return 0, fmt.Errorf("%q is not a number", s)
	}
	v, err := strconv.ParseFloat(s, 64)
	if math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, fmt.Errorf("%q is out of range (want a finite number)", s)
	}
	if err != nil && !errors.Is(err, strconv.ErrRange) { // underflow to 0 is fine
		return 0, fmt.Errorf("%q is not a number", s)
	}
	return v, nil
}

// isMissing reports whether a cell is a missing-value marker.
func isMissing(s string) bool {
	switch s {
	case "", "n/a", "N/A", "NaN", "nan", "NAN":
		return true
	}
	return false
}

// lineList renders up to five line numbers: "lines 4, 9 and 3 more".
func lineList(lines []int, total int) string {
	var b strings.Builder
	if total == 1 {
		b.WriteString("line ")
	} else {
		b.WriteString("lines ")
	}
	for i, l := range lines {
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(strconv.Itoa(l))
	}
	if total > len(lines) {
		fmt.Fprintf(&b, " and %d more", total-len(lines))
	}
	return b.String()
}

// checkHeader validates header names: none empty, none repeated.
func checkHeader(names []string, line int) error {
	seen := make(map[string]int, len(names))
	for i, n := range names {
		if n == "" {
			return perr(line, "", "header field %d is empty; want a column name (a stray separator at the end of the line?)", i+1)
		}
		if j, ok := seen[n]; ok {
			return perr(line, n, "column name appears twice (fields %d and %d); want unique names", j+1, i+1)
		}
		seen[n] = i
	}
	return nil
}

func quotedList(names []string) string {
	if len(names) > 30 {
		return strings.Join(names[:30], ", ") + fmt.Sprintf(", ... (%d more)", len(names)-30)
	}
	return strings.Join(names, ", ")
}

func plural(n int, word string) string {
	if n == 1 {
		return "1 " + word
	}
	return fmt.Sprintf("%d %ss", n, word)
}

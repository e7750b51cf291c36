// Package events reads the two plain-text tables a first-level fit needs
// besides the image: the task timing (a BIDS-style events.tsv) and an
// optional confounds table (one row per volume).
//
// Method source: the BIDS events.tsv conventions summarised in the project's
// methods notes, section n (UTF-8, tab-separated, a header row, columns found
// by name; `onset`, `duration` and `trial_type` required by winnow; `n/a` for
// missing values). The confounds rules (tab or comma separated, `n/a` allowed
// only in the first row, where derivative columns have no value) are common
// practice for BIDS-derived confound files (methods n).
//
// Reading rules shared by both tables:
//   - a UTF-8 byte-order mark is stripped; line ends may be \n, \r\n or \r;
//   - blank lines (anywhere) are skipped, but still counted in line numbers;
//   - cells are trimmed of surrounding white space;
//   - numbers are decimal, optionally signed, with an optional exponent
//     ("1e-3", "2.5E+01"); "inf", "nan" and hexadecimal forms are refused;
//   - every row must have as many fields as the header;
//   - limits are checked before anything large is allocated: at most
//     MaxRows data rows, MaxLineBytes bytes per line, MaxColumns columns,
//     MaxCells stored numeric cells and MaxBytes bytes in all.
//
// ParseEvents specifics: onset must be a finite number (negative is allowed:
// events before the first kept volume); duration must be >= 0, and `n/a`
// becomes 0 (an impulse) with a warning; rows whose trial_type is `n/a` are
// dropped (their other cells are not checked) with a count in a warning; an
// empty trial_type is an error. A file without any event left is an error.
// Every other column is offered in Events.Numeric when each of its cells
// (over the kept rows) is a number or a missing marker (`n/a`, empty, NaN),
// and at least one is a number; missing cells become NaN. Columns with text
// are simply absent from Numeric.
//
// ParseConfounds specifics: the separator is a tab if the header line holds
// one, else a comma if it holds one (a single column needs neither). Missing
// markers (`n/a`, `N/A`, `NaN`, an empty cell) are allowed in the first data
// row only and become 0 there, with a warning naming the columns; elsewhere
// they are an error. Values are not mean-centred here (the design does it).
//
// Errors about a place in the file are *ParseError; they never carry the file
// name (the caller adds it).
package events

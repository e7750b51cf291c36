// Package contrast parses contrast specifications and checks them against a
// design matrix.
//
// A SPEC is NAME=EXPR. EXPR is a weighted sum of design column names, or
// several comma-separated sums, which make an F contrast:
//
//	naming-scrambled=naming - scrambled
//	avg=0.5*a + 0.5*b - c
//	third=1/3*a + 1/3*b + 1/3*c
//	any=a, b
//
// Rules (documented choices):
//   - Column names are matched exactly and case-sensitively against the
//     design's names. Names are free text (BIDS trial_type values may hold
//     '-', '.', ':', digits, even spaces or commas), so at each position the
//     longest known name that ends at a boundary (end, white space, '+', '-'
//     or ',') is taken first; only then is '-' read as an operator. A column
//     named "a-b" therefore wins over "a" minus "b"; write "a - b" with
//     spaces only if no column "a - b" exists.
//   - A weight is a decimal number (1, 0.5, 2e-1) or a fraction of two
//     (1/3), written before the name with '*': "2*a". Juxtaposition ("2 a",
//     "2a") is refused with a hint, as is a weight after the name ("a*2").
//   - White space around operators is optional; a sum may start with '+' or
//     '-'; one sign per term.
//   - The same name twice in one sum is merged: its weights are added
//     ("0.5*a + 0.5*a" is "a"). A sum whose weights are then all zero
//     ("a - a", "0*a") is an error.
//   - NAME may hold only the characters A-Z a-z 0-9 . _ + - (it starts output
//     file names), at most 100 of them, and may not start with '.'.
//
// Estimability (methods c.1, common practice): a contrast row c is estimable
// when it lies in the row space of X, ‖c − (X⁺X)c‖ ≤ 1e-8·‖c‖. The numerical
// rank and the null space come from the SVD of the column-scaled design X·D
// (D = diag(1/‖x_j‖), all-zero columns unscaled), with the usual rule that
// singular values below max(n,p)·s_max·2.2e−16 count as zero (methods c.1);
// the null vectors are mapped back (D·u) and orthonormalised, and
// c − (X⁺X)c is the projection of c onto that null space, measured in the
// contrast's own coordinates.
//
// F contrasts (methods c.3): Rank returns q* = rank(C (X'X)⁺ C'), computed
// as the rank of B = C·D·V_r·S_r⁻¹ (B·B' equals C (X'X)⁻ C' for a
// generalised inverse that gives the same value as the pseudo-inverse when
// every row is estimable), singular values of B below 1e-8·s_max(B) counting
// as zero (the same relative tolerance as the estimability check; a choice
// made here).
package contrast

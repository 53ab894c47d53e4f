package rules

import (
	"strconv"
	"strings"
	"unicode"

	"golang.org/x/text/unicode/norm"
)

// SanitizeName turns a column header into the identifier a rule uses for
// it:
//
//  1. accents are dropped ("Größe" -> "grosse", "Débit" -> "debit"),
//     "%" reads as "pct";
//  2. letters are lower-cased; every run of other characters (spaces,
//     brackets, dashes, ...) becomes one "_", trimmed at both ends;
//  3. a name starting with a digit gets the prefix "col_";
//  4. a word CEL reserves (in, if, null, int, map, ...) gets a trailing "_".
//
// Examples: "Systolic BP" -> systolic_bp, "FEV1 (L)" -> fev1_l,
// "% predicted" -> pct_predicted, "2nd reading" -> col_2nd_reading,
// "in" -> in_. An empty result becomes "" (SanitizeNames numbers it).
func SanitizeName(s string) string {
	var sb strings.Builder
	sep := false
	put := func(w string) {
		if sep && sb.Len() > 0 {
			sb.WriteByte('_')
		}
		sep = false
		sb.WriteString(w)
	}
	for _, r := range norm.NFKD.String(s) {
		switch {
		case unicode.Is(unicode.Mn, r):
			// combining accent left over from decomposition
		case r < unicode.MaxASCII && (unicode.IsLetter(r) || unicode.IsDigit(r)):
			put(string(unicode.ToLower(r)))
		case r == '%':
			sep = true
			put("pct")
			sep = true
		default:
			if t := foldLetter(unicode.ToLower(r)); t != "" {
				put(t)
			} else {
				sep = true
			}
		}
	}
	out := sb.String()
	if out == "" {
		return ""
	}
	if out[0] >= '0' && out[0] <= '9' {
		out = "col_" + out
	}
	if reservedWord(out) {
		out += "_"
	}
	return out
}

// foldLetter spells letters that have no accent-free decomposition; ""
// for any other rune.
func foldLetter(r rune) string {
	switch r {
	case 'ß':
		return "ss"
	case 'æ':
		return "ae"
	case 'œ':
		return "oe"
	case 'ø':
		return "o"
	case 'đ', 'ð':
		return "d"
	case 'ł':
		return "l"
	case 'þ':
		return "th"
	case 'ı':
		return "i"
	}
	return ""
}

// reservedWord reports CEL's reserved words, type names and literals,
// which cannot (or should not) name a variable.
func reservedWord(s string) bool {
	switch s {
	case "true", "false", "null", "in", "as", "break", "const", "continue", "else",
		"for", "function", "if", "import", "let", "loop", "package", "namespace",
		"return", "var", "void",
		"int", "uint", "double", "bool", "string", "bytes", "list", "map",
		"null_type", "type", "dyn":
		return true
	}
	return false
}

// SanitizeNames applies SanitizeName to a header row and makes the result
// usable as a set of variables: an empty name becomes column_N (N its
// 1-based position) and a repeated name gets _2, _3, ... ("BP", "bp" ->
// bp, bp_2).
func SanitizeNames(headers []string) []string {
	out := make([]string, len(headers))
	used := make(map[string]bool, len(headers))
	for i, h := range headers {
		n := SanitizeName(h)
		if n == "" {
			n = "column_" + strconv.Itoa(i+1)
		}
		base := n
		for k := 2; used[n]; k++ {
			n = base + "_" + strconv.Itoa(k)
		}
		used[n] = true
		out[i] = n
	}
	return out
}

// ColumnKinds infers the kind of each of ncol columns from rows of cells:
// the one kind all non-empty cells share, or Any when they mix kinds or
// the column is empty.
func ColumnKinds(rows [][]Value, ncol int) []ResultKind {
	kinds := make([]ResultKind, ncol)
	seen := make([]bool, ncol)
	mixed := make([]bool, ncol)
	for _, row := range rows {
		for j := 0; j < ncol && j < len(row); j++ {
			k := row[j].kind
			if k == Any {
				continue
			}
			if !seen[j] {
				seen[j], kinds[j] = true, k
			} else if kinds[j] != k {
				mixed[j] = true
			}
		}
	}
	for j := range kinds {
		if mixed[j] {
			kinds[j] = Any
		}
	}
	return kinds
}

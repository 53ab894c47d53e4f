package table

import (
	"cmp"
	"slices"
	"strconv"
	"strings"

	"github.com/xuri/excelize/v2"
)

// CellError is a problem with one data row of a table, or with one of its
// cells, placed as the user sees it: a CSV file's line, a workbook sheet's
// row and cell.
type CellError struct {
	// Row is the data row (0-based index into Table.Rows) and Col the
	// column (index into Table.Header; -1 for the row as a whole).
	Row, Col int
	// Line is the CSV line or the sheet row of the data row.
	Line int
	// Column is the header of column Col ("" for the row as a whole).
	Column string
	// Sheet: the table is a workbook sheet, so the cell has a reference
	// such as C12.
	Sheet bool
	// Err says what is wrong.
	Err error
}

func (e *CellError) where() string {
	var b strings.Builder
	switch {
	case e.Sheet && e.Col >= 0:
		ref, err := excelize.CoordinatesToCellName(e.Col+1, e.Line)
		if err != nil {
			ref = "R" + strconv.Itoa(e.Line) + "C" + strconv.Itoa(e.Col+1)
		}
		b.WriteString("cell " + ref)
		if e.Column != "" {
			b.WriteString(" (column " + strconv.Quote(e.Column) + ")")
		}
	case e.Sheet:
		b.WriteString("row " + strconv.Itoa(e.Line))
	default:
		b.WriteString("line " + strconv.Itoa(e.Line))
		if e.Col >= 0 && e.Column != "" {
			b.WriteString(", column " + strconv.Quote(e.Column))
		}
	}
	return b.String()
}

func (e *CellError) Error() string {
	if e.Err == nil {
		return e.where()
	}
	return e.where() + ": " + e.Err.Error()
}

// Unwrap returns what is wrong.
func (e *CellError) Unwrap() error { return e.Err }

// MaxListed is how many problems Problems' message lists before it counts
// the rest.
const MaxListed = 20

// Problems collects the problems found in the rows of a table, so that one
// run reports them all rather than the first. The zero value is empty and
// ready to use. As an error, it lists the first MaxListed problems in row
// order and counts the others; errors.Is and errors.As look into all of
// them.
type Problems struct {
	list []*CellError
}

// Add records a problem.
func (p *Problems) Add(e *CellError) { p.list = append(p.list, e) }

// Len is the number of problems recorded.
func (p *Problems) Len() int { return len(p.list) }

// List returns the problems in row order (then column order).
func (p *Problems) List() []*CellError {
	slices.SortStableFunc(p.list, func(a, b *CellError) int {
		if c := cmp.Compare(a.Row, b.Row); c != 0 {
			return c
		}
		return cmp.Compare(a.Col, b.Col)
	})
	return p.list
}

// Err returns p as an error, or nil when it holds no problem.
func (p *Problems) Err() error {
	if p == nil || len(p.list) == 0 {
		return nil
	}
	return p
}

// Error lists the first problems, one per line, and counts the rest.
func (p *Problems) Error() string {
	var b strings.Builder
	list := p.List()
	if len(list) == 1 {
		return list[0].Error()
	}
	b.WriteString(strconv.Itoa(len(list)) + " problems:")
	for i, e := range list {
		if i == MaxListed {
			b.WriteString("\n  and " + strconv.Itoa(len(list)-MaxListed) + " more")
			break
		}
		b.WriteString("\n  " + e.Error())
	}
	return b.String()
}

// Unwrap returns every problem.
func (p *Problems) Unwrap() []error {
	out := make([]error, len(p.list))
	for i, e := range p.list {
		out[i] = e
	}
	return out
}

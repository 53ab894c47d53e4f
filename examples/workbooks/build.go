package workbooks

import (
	_ "embed"
)

// Files of the example workbooks, relative to this package's folder.
const (
	XLSXName = "screening.xlsx"
	ODSName  = "screening.ods"
)

//go:embed screening.xlsx
var committedXLSX []byte

//go:embed screening.ods
var committedODS []byte

// XLSX returns a copy of the committed screening.xlsx.
func XLSX() []byte { return append([]byte(nil), committedXLSX...) }

// ODS returns a copy of the committed screening.ods.
func ODS() []byte { return append([]byte(nil), committedODS...) }

// Build builds both workbooks from the demo data. The same data always
// give the same bytes.
func Build() (xlsx, ods []byte, err error) {
	wb, err := layout()
	if err != nil {
		return nil, nil, err
	}
	if xlsx, err = writeXLSX(wb); err != nil {
		return nil, nil, err
	}
	if ods, err = writeODS(wb); err != nil {
		return nil, nil, err
	}
	return xlsx, ods, nil
}

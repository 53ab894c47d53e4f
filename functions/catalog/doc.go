// Package catalog is veer's catalogue of spreadsheet cell functions: the one
// list that drives the server's dispatch, the GET /v1/functions listing, the
// add-ins' function metadata and the help texts.
//
// Each entry names a VEER.* function, its parameters and options, its result
// shape and the Go function that coerces the cells (through package cell)
// and calls the statistics (package screening and below). The entries do no
// I/O of their own: models come from and go to the server's registry through
// cell.Env.
//
// A signal is a prompt for review by a licensed clinician under local
// occupational-health rules, not a diagnosis.
package catalog

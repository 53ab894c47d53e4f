// Package examples carries veer's demo data so the veer binary can run the
// whole job with no files on disk.
//
// The data are the committed files in examples/data, written by
// `go run ./examples/gen` from the seeded generator in package
// veer/examples/scenario: a fictional offshore wind-turbine maintenance
// company (Morvandel Offshore Rotorworks) with a tower crew and a workshop
// crew, a healthy reference cohort, a screened workforce and the truth about
// which workers drift in systolic blood pressure or FEV1 and from what age.
// See examples/README.md for the generating model.
//
// Screening is an aid: a signal prompts review by a licensed clinician under
// local occupational-health rules; it is not a diagnosis.
package examples

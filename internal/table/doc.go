// Package table reads and writes the rectangular tables of exam rows that the
// veer command line exchanges with users: CSV files with a header row, one row
// per medical exam.
//
// It does transport only: it finds columns by name, turns cells into numbers
// with errors that name the row and column a spreadsheet user sees, and writes
// CSV back with the same quoting rules. It does no statistics.
package table

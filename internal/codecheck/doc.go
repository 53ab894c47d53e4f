// Package codecheck holds repository-wide checks that run with the tests:
// every Go file is gofmt-formatted, `go vet` finds nothing, and go.mod is
// tidy and buildable with every patch release of the Go it names.
package codecheck

// Package codecheck holds repository-wide checks that run with the tests:
// every Go file is gofmt-formatted and `go vet` finds nothing.
package codecheck

//go:build race

package server

// raceEnabled: the race detector slows the load test ~10x, so it runs a
// smaller load under it.
const raceEnabled = true

//go:build race

package server_test

// raceDetector reports whether the tests run under the race detector,
// which slows the code 5–20× and so changes what a timing bound means.
const raceDetector = true

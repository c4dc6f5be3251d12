//go:build race

package api_test

// raceBuild is true when the tests run with the race detector, so that the daemon binary the
// tests build is built the same way (and from the same build cache).
const raceBuild = true

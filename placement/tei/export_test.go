package tei

// SameCollation lets the external tests (package tei_test) use the comparison of write_test.go.
var SameCollation = sameCollation

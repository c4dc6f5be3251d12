//go:build !race

package api_test

const raceBuild = false

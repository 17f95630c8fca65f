package main

import (
	"os"
	"testing"
)

// TestMain lets tests run this test binary as the trajvault command
// (TRAJVAULT_AS_MAIN=1), to test what only a separate process shows,
// such as being killed mid-run.
func TestMain(m *testing.M) {
	if os.Getenv("TRAJVAULT_AS_MAIN") == "1" {
		main()
		return
	}
	os.Exit(m.Run())
}

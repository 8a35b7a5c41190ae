package main

import (
	"os"
	"runtime"
	"testing"
)

// TestMain fixes the number of cores the embedded server sees: the cost
// estimates that `check` prints (memory of per-core workspaces, seconds of
// work spread over the cores) depend on it, and the golden files were
// written with 2.
func TestMain(m *testing.M) {
	runtime.GOMAXPROCS(2)
	os.Exit(m.Run())
}

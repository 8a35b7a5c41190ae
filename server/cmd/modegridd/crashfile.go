package main

import (
	"fmt"
	"io"
	"log/slog"
	"os"
	"runtime/debug"
	"strings"
)

// maxCrashReport bounds the previous crash's output put into one log line
// (the start of a Go crash names the error and the failing goroutine).
const maxCrashReport = 64 << 10

// openCrashFile reports the output a previous run left in path (a crash
// Go could not recover: out of memory, concurrent map writes, an
// unrecovered panic) as one JSON log line, empties the file, and makes it
// the runtime's crash output from now on (debug.SetCrashOutput: Go still
// writes the trace to stderr as well). The caller closes the file at exit.
func openCrashFile(path string, log *slog.Logger) (*os.File, error) {
	f, err := os.OpenFile(path, os.O_RDWR|os.O_CREATE, 0o600)
	if err != nil {
		return nil, fmt.Errorf("crash-file: %w", err)
	}
	prev, err := io.ReadAll(io.LimitReader(f, maxCrashReport+1))
	if err == nil && len(prev) > 0 {
		first, _, _ := strings.Cut(strings.TrimSpace(string(prev)), "\n")
		log.Error("previous run crashed", "crash_file", path, "error", first,
			"output", string(prev[:min(len(prev), maxCrashReport)]), "truncated", len(prev) > maxCrashReport)
	}
	if err == nil {
		err = f.Truncate(0)
	}
	if err == nil {
		_, err = f.Seek(0, io.SeekStart)
	}
	if err == nil {
		err = debug.SetCrashOutput(f, debug.CrashOptions{})
	}
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("crash-file %s: %w", path, err)
	}
	return f, nil
}

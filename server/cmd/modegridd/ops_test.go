package main

import (
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"log/slog"
	"os"
	"os/exec"
	"path/filepath"
	"runtime/debug"
	"strings"
	"testing"
	"time"
)

// crashAsMain is modegridd's start-up up to the crash file, then a panic
// in main's goroutine (MODEGRID_TEST_AS_MAIN=crash).
func crashAsMain() {
	defer logPanic("main")
	o, err := parse(os.Args[1:], os.Getenv, os.Stderr)
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(exitUsage)
	}
	if _, err := openCrashFile(o.crashFile, o.cfg.Logger); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(exitUsage)
	}
	panic("deliberate test crash")
}

// withEnviron makes parse see env as the process environment.
func withEnviron(t *testing.T, env []string) {
	t.Helper()
	old := environ
	environ = func() []string { return env }
	t.Cleanup(func() { environ = old })
}

// TestUnknownEnvironment: a MODEGRID_* variable that names no flag stops
// the start with every such variable named, the nearest known one
// suggested, and the known ones listed; every flag's variable (so any flag
// added later) is known.
func TestUnknownEnvironment(t *testing.T) {
	var all []string
	newFlags(&options{}).VisitAll(func(f *flag.Flag) {
		if f.Name != "version" {
			all = append(all, envName(f.Name)+"=")
		}
	})
	withEnviron(t, append(all, "PATH=/bin", "MODEGRID=x", "MODEGRID_TOKEN=the-cli-s", "MODEGRID_BENCH_LARGE=1"))
	if _, err := parse(nil, env(nil), &bytes.Buffer{}); err != nil {
		t.Errorf("every flag's variable set (empty): %v; want no error", err)
	}

	withEnviron(t, []string{"MODEGRID_REDIS_ADR=redis:6379", "MODEGRID_SHUTDOWN_GRACE=5s", "MODEGRID_CACHEBYTES=1MiB", "MODEGRID_ZZZZZZZZZZZZZZZZ=1"})
	_, err := parse(nil, env(nil), &bytes.Buffer{})
	if err == nil {
		t.Fatal("misspelt variables accepted")
	}
	msg := err.Error()
	for _, want := range []string{
		"MODEGRID_REDIS_ADR (did you mean MODEGRID_REDIS_ADDR?)",
		"MODEGRID_CACHEBYTES (did you mean MODEGRID_CACHE_BYTES?)",
		"MODEGRID_ZZZZZZZZZZZZZZZZ", "known: ", "MODEGRID_LOG_LEVEL", "MODEGRID_HEALTH_LISTEN",
	} {
		if !strings.Contains(msg, want) {
			t.Errorf("error %q lacks %q", msg, want)
		}
	}
	if strings.Contains(msg, "MODEGRID_ZZZZZZZZZZZZZZZZ (did you mean") {
		t.Errorf("error %q suggests a name for a variable close to none", msg)
	}
	if strings.Contains(msg, "MODEGRID_SHUTDOWN_GRACE (") || strings.Count(msg, "MODEGRID_SHUTDOWN_GRACE") != 1 {
		t.Errorf("error %q reports the known MODEGRID_SHUTDOWN_GRACE", msg)
	}
	var stderr bytes.Buffer
	if code := run(context.Background(), nil, &bytes.Buffer{}, &stderr); code != exitUsage {
		t.Errorf("run with a misspelt variable: exit %d; want %d (%s)", code, exitUsage, stderr.String())
	}
}

func TestEditDistance(t *testing.T) {
	tests := []struct {
		a, b string
		want int
	}{
		{"", "", 0}, {"abc", "", 3}, {"kitten", "sitting", 3}, {"MODEGRID_REDIS_ADR", "MODEGRID_REDIS_ADDR", 1},
		{"flaw", "lawn", 2},
	}
	for _, tt := range tests {
		if got := editDistance(tt.a, tt.b); got != tt.want {
			t.Errorf("editDistance(%q, %q) = %d; want %d", tt.a, tt.b, got, tt.want)
		}
		if got := editDistance(tt.b, tt.a); got != tt.want {
			t.Errorf("editDistance(%q, %q) = %d; want %d (symmetric)", tt.b, tt.a, got, tt.want)
		}
	}
}

// TestCrash: a panic in main's goroutine is logged as one JSON line before
// the process dies; with --crash-file the runtime's crash output also goes
// to that file, and the next start reports it as one JSON line and empties
// the file.
func TestCrash(t *testing.T) {
	path := filepath.Join(t.TempDir(), "crash")
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), "MODEGRID_TEST_AS_MAIN=crash", "MODEGRID_TEST_ARGS=--crash-file "+path)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	err := cmd.Run()
	if ee, ok := err.(*exec.ExitError); !ok || ee.ExitCode() != 2 {
		t.Fatalf("crashing child: %v; want exit status 2 (Go's, for a panic)\n%s", err, stderr.String())
	}
	first, _, _ := strings.Cut(stderr.String(), "\n")
	var rec struct{ Msg, Level, Goroutine, Panic, Stack string }
	if err := json.Unmarshal([]byte(first), &rec); err != nil || rec.Msg != "crash" || rec.Level != "ERROR" ||
		rec.Goroutine != "main" || rec.Panic != "deliberate test crash" || !strings.Contains(rec.Stack, "crashAsMain") {
		t.Errorf("first stderr line %q (%v); want the JSON crash line with panic and stack", first, err)
	}
	out, err := os.ReadFile(path)
	if err != nil || !strings.Contains(string(out), "panic: deliberate test crash") {
		t.Fatalf("crash file %q (%v); want the runtime's crash output", out, err)
	}

	var log bytes.Buffer
	f, err := openCrashFile(path, slog.New(slog.NewJSONHandler(&log, nil)))
	if err != nil {
		t.Fatal(err)
	}
	debug.SetCrashOutput(nil, debug.CrashOptions{}) // this test process keeps stderr only
	f.Close()
	lines := strings.Split(strings.TrimSpace(log.String()), "\n")
	var prev struct{ Msg, Level, Error, Output string }
	if len(lines) != 1 || json.Unmarshal([]byte(lines[0]), &prev) != nil || prev.Msg != "previous run crashed" || prev.Level != "ERROR" ||
		!strings.HasPrefix(prev.Error, "panic: deliberate test crash") || !strings.Contains(prev.Output, "goroutine") {
		t.Errorf("start-up log %q; want one JSON line reporting the previous crash", log.String())
	}
	if b, err := os.ReadFile(path); err != nil || len(b) != 0 {
		t.Errorf("crash file after the report: %q, %v; want empty", b, err)
	}
}

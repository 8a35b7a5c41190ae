package main

// Load and shutdown tests, short enough for `make test`: the
// engine against an in-process server below and above its concurrency cap,
// and against a real modegridd child process (built once in TestMain)
// for its peak memory and for SIGTERM with 20 calls in flight.

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"go.uber.org/goleak"

	"github.com/materials-lab/modegrid/client"
	"github.com/materials-lab/modegrid/proto/examples"
	"github.com/materials-lab/modegrid/server"
)

// daemon is the modegridd binary TestMain built, or "" with daemonErr.
var (
	daemon    string
	daemonErr error
)

// TestMain builds modegridd once, as the Dockerfile does (static, trimmed;
// the same compile flags as deploy/'s tests, so the build cache is shared),
// runs the tests, removes the binary and checks for leaked goroutines.
func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "modegrid-load-test-")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	daemon, daemonErr = buildDaemon(dir)
	code := m.Run()
	os.RemoveAll(dir)
	if code == 0 {
		if err := goleak.Find(); err != nil {
			fmt.Fprintf(os.Stderr, "goleak: %v\n", err)
			code = 1
		}
	}
	os.Exit(code)
}

func buildDaemon(dir string) (string, error) {
	out := filepath.Join(dir, "modegridd")
	cmd := exec.Command("go", "build", "-trimpath", "-ldflags", "-s -w -X main.version=load-test", "-o", out, "./server/cmd/modegridd")
	cmd.Dir = filepath.Join("..", "..", "..")
	cmd.Env = append(os.Environ(), "CGO_ENABLED=0", "GOFLAGS=-buildvcs=false")
	if b, err := cmd.CombinedOutput(); err != nil {
		return "", fmt.Errorf("go build modegridd: %v\n%s", err, b)
	}
	return out, nil
}

func daemonPath(t *testing.T) string {
	t.Helper()
	if daemonErr != nil {
		t.Fatal(daemonErr)
	}
	return daemon
}

func exampleModels(t *testing.T, names ...string) []namedModel {
	t.Helper()
	if len(names) == 0 {
		names = examples.Names()
	}
	var out []namedModel
	for _, n := range names {
		c, err := examples.Load(n)
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, namedModel{name: n, crystal: c})
	}
	return out
}

// inProcess serves cfg on loopback and returns its address; cleanup shuts
// it down.
func inProcess(t *testing.T, cfg server.Config) (*server.Server, string) {
	t.Helper()
	cfg.MetricsListen = "off"
	srv, err := server.New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- srv.Serve(lis) }()
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		defer cancel()
		srv.Shutdown(ctx)
		if err := <-done; err != nil {
			t.Errorf("Serve: %v", err)
		}
	})
	return srv, lis.Addr().String()
}

// runEngine runs a load of cfg against addr on a fresh client, closing it
// afterwards.
func runEngine(t *testing.T, addr string, cfg config) []sample {
	t.Helper()
	c, err := dialEngine(addr, client.WithMaxAttempts(1), client.WithFailFast())
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	e := &engine{cfg: cfg, c: c}
	if err := e.run(ctx); err != nil {
		t.Fatal(err)
	}
	return e.samples
}

func baseConfig(t *testing.T) config {
	return config{concurrency: 8, duration: 1500 * time.Millisecond, cached: 0.5, models: exampleModels(t),
		mesh3D: 8, modesPoints: 32, callTimeout: 30 * time.Second, seed: 7}
}

// TestLoadBelowCap: eight callers, a mix of cached and cold calls, a
// server admitting 2 computations with 16 waiting: every call succeeds and
// is complete, and once the client has gone the server has no goroutine
// more than before the run.
func TestLoadBelowCap(t *testing.T) {
	_, addr := inProcess(t, server.Config{MaxConcurrent: 2, MaxQueue: 16, QueueTimeout: 30 * time.Second})
	idle := goleak.IgnoreCurrent()
	ss := runEngine(t, addr, baseConfig(t))
	all := summarize(ss)
	t.Logf("%d calls: p50 %.2f ms, p99 %.2f ms", all.Calls, all.P50Ms, all.P99Ms)
	if len(all.Codes) != 0 || all.Incomplete != 0 || all.OK != all.Calls {
		t.Errorf("errors %v, %d incomplete of %d calls; want none below the cap", all.Codes, all.Incomplete, all.Calls)
	}
	for _, class := range []string{classCached, classCold} {
		n := 0
		for _, s := range ss {
			if s.class == class {
				n++
			}
		}
		if n == 0 {
			t.Errorf("no %s calls in the mix", class)
		}
	}
	goleak.VerifyNone(t, idle)
}

// TestLoadAboveCap: twelve callers of cold calls against a server admitting
// one computation with two waiting: the calls past the cap are refused at
// once with RESOURCE_EXHAUSTED (queue full), counted by the server as
// such; no call gets any other error or waits for a timeout.
func TestLoadAboveCap(t *testing.T) {
	srv, addr := inProcess(t, server.Config{MaxConcurrent: 1, MaxQueue: 2, QueueTimeout: 20 * time.Second})
	cfg := baseConfig(t)
	cfg.concurrency, cfg.cached = 12, 0
	ss := runEngine(t, addr, cfg)
	all := summarize(ss)
	refused := all.Codes["ResourceExhausted"]
	t.Logf("%d calls: %d OK, %d refused; p99 %.2f ms, max %.2f ms", all.Calls, all.OK, refused, all.P99Ms, all.MaxMs)
	if refused == 0 || all.OK == 0 || len(all.Codes) != 1 || all.Incomplete != 0 {
		t.Errorf("codes %v, %d OK, %d incomplete; want OK and RESOURCE_EXHAUSTED only, both present", all.Codes, all.OK, all.Incomplete)
	}
	// A refusal is immediate: nothing waited anywhere near the 20 s queue
	// timeout (a pile-up of waiting calls would).
	if all.MaxMs > 5000 {
		t.Errorf("the slowest call took %.0f ms; want every call well inside the 20 s queue timeout", all.MaxMs)
	}
	mfs, err := srv.Registry().Gather()
	if err != nil {
		t.Fatal(err)
	}
	counted := 0.0
	for _, mf := range mfs {
		if mf.GetName() == "modegrid_computations_rejected_total" {
			for _, m := range mf.GetMetric() {
				if m.GetLabel()[0].GetValue() == "queue_full" {
					counted = m.GetCounter().GetValue()
				} else if v := m.GetCounter().GetValue(); v != 0 {
					t.Errorf("%s rejections %v; want only queue_full", m.GetLabel()[0].GetValue(), v)
				}
			}
		}
	}
	if counted != float64(refused) {
		t.Errorf("server counted %v queue_full rejections; the client saw %d", counted, refused)
	}
}

// daemonLoad runs the command line against the built modegridd and
// returns its JSON report.
func daemonLoad(t *testing.T, args ...string) *report {
	t.Helper()
	var out, errb bytes.Buffer
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	args = append([]string{"--spawn", daemonPath(t), "--json"}, args...)
	if code := run(ctx, args, &out, &errb); code != 0 {
		t.Fatalf("modegrid-load %s: exit %d: %s", strings.Join(args, " "), code, errb.String())
	}
	var r report
	if err := json.Unmarshal(out.Bytes(), &r); err != nil {
		t.Fatalf("report: %v\n%s", err, out.String())
	}
	return &r
}

// TestDaemonMemoryBound: a real modegridd with a 16 MiB cache under a
// load that fills it many times over (cold DOS calls on grids not seen
// before): no errors, the cache stays within its bound and evicts, and the
// server's goroutines are back to their number before the run. The peak
// resident set (VmHWM) is logged, not asserted: it depends on the
// collector's timing and the machine's load (about 20 MiB of runtime plus
// the cache and the computations in flight; GOMEMLIMIT is the cache + 32
// MiB). The cache bound is the behaviour under test. The models are the
// examples without Born charges: a polar model's calls carry its Ewald
// sums (15–20× the work per q of these spring models), which would slow
// the filling of the cache within the run, not change how it is bounded.
func TestDaemonMemoryBound(t *testing.T) {
	const cache = 16 << 20
	var plain []string
	for _, m := range exampleModels(t) {
		if len(m.crystal.GetEpsilonInf()) == 0 {
			plain = append(plain, m.name)
		}
	}
	r := daemonLoad(t, "--server-args", fmt.Sprintf("--max-concurrent 2 --cache-bytes %d", cache), "--server-env", fmt.Sprintf("GOMEMLIMIT=%d", cache+32<<20),
		"-c", "8", "-d", "3s", "--cached", "0.3", "--grid", "16", "--models", strings.Join(plain, ","))
	s := r.Server
	t.Logf("%d calls, %.0f/s, p99 %.1f ms; peak RSS %.1f MiB; cache %.1f of %.1f MiB, %.0f evictions; goroutines %.0f → %.0f",
		r.Calls, r.ThroughputPerS, r.All.P99Ms, float64(s.PeakRSSBytes)/(1<<20), s.CacheBytes/(1<<20), s.CacheMaxBytes/(1<<20), s.CacheEvictions, s.GoroutinesBefore, s.GoroutinesAfter)
	if len(r.All.Codes) != 0 || r.All.Incomplete != 0 {
		t.Errorf("errors %v, %d incomplete; want none", r.All.Codes, r.All.Incomplete)
	}
	if s.CacheMaxBytes != cache || s.CacheBytes > cache || s.CacheEvictions == 0 {
		t.Errorf("cache %.0f of %.0f bytes, %.0f evictions; want a full %d-byte cache that evicted", s.CacheBytes, s.CacheMaxBytes, s.CacheEvictions, cache)
	}
	if s.GoroutinesBefore == 0 || s.GoroutinesAfter > s.GoroutinesBefore {
		t.Errorf("server goroutines %.0f before the run, %.0f after; want no growth", s.GoroutinesBefore, s.GoroutinesAfter)
	}
	if s.ExitCode != 0 {
		t.Errorf("modegridd exited %d after SIGTERM; want 0", s.ExitCode)
	}
}

// TestDaemonSIGTERM: SIGTERM to a real modegridd while 20 calls are in
// flight (on the wire: 2 computing, 18 queued). With a grace period long enough, every
// one finishes with its complete answer; with a grace period shorter than
// the work, the calls still running when it ends get UNAVAILABLE and none
// gets an OK with part of its answer. Either way every call ends and the
// process exits 0: a stop whose grace ran out is still an orderly stop
// (the cut calls are logged). How long after the signal the last call
// ended is logged, not asserted: on a loaded machine it is the machine's
// figure, not the server's.
func TestDaemonSIGTERM(t *testing.T) {
	tests := []struct {
		name    string
		grace   time.Duration
		work    []string // load flags sizing each call
		wantCut bool     // some calls must be cut off
	}{
		{name: "calls finish within the grace", grace: 20 * time.Second, work: []string{"--modes-points", "2000", "--grid", "10"}},
		{name: "grace shorter than the work", grace: 300 * time.Millisecond, work: []string{"--modes-points", "50000", "--grid", "24"},
			wantCut: true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			args := append([]string{"--server-args", "--max-concurrent 2 --shutdown-grace " + tt.grace.String(),
				"--models", "rocksalt-like", "--cold-kinds", "modes,dos", "--cached", "0", "-c", "20", "-d", "60s", "--sigterm-after", "500ms"}, tt.work...)
			r := daemonLoad(t, args...)
			s := r.Sigterm
			t.Logf("SIGTERM with %d in flight: %v, %d incomplete; last call ended %.0f ms after; exit %d after %.0f ms",
				s.InFlight, s.Codes, s.Incomplete, s.MaxAfterSignalMs, s.ExitCode, s.ExitAfterMs)
			ended := 0
			for code, n := range s.Codes {
				ended += n
				if code != "OK" && code != "Unavailable" {
					t.Errorf("%d calls ended with %s; want OK or UNAVAILABLE only", n, code)
				}
			}
			if s.InFlight != 20 || ended != 20 {
				t.Errorf("%d calls in flight at the signal, %d ended after it; want 20 and 20", s.InFlight, ended)
			}
			if s.Incomplete != 0 {
				t.Errorf("%d calls got OK with part of their answer; want none", s.Incomplete)
			}
			if cut := s.Codes["Unavailable"]; tt.wantCut != (cut > 0) {
				t.Errorf("%d calls cut off; want cut-offs %v", cut, tt.wantCut)
			}
			if s.ExitCode != 0 {
				t.Errorf("modegridd exited %d; want 0 (an orderly stop)", s.ExitCode)
			}
		})
	}
}

// TestFlags: bad command lines are refused with every problem named.
func TestFlags(t *testing.T) {
	tests := []struct {
		name string
		args []string
		want []string
	}{
		{name: "no target", args: nil, want: []string{"exactly one of --server and --spawn"}},
		{name: "both targets", args: []string{"--server", "x:1", "--spawn", "y"}, want: []string{"exactly one"}},
		{name: "everything wrong", args: []string{"--server", "x:1", "-c", "0", "--cached", "2", "--models", "nosuch", "--cold-kinds", "modes,bogus", "--sigterm-after", "1s"},
			want: []string{"-c must be ≥ 1", "--cached must be in [0, 1]", `no example crystal "nosuch"`, `"bogus" is not one of`, "--sigterm-after needs --spawn"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var errb bytes.Buffer
			if code := run(context.Background(), tt.args, &bytes.Buffer{}, &errb); code != 2 {
				t.Errorf("exit %d; want 2", code)
			}
			for _, w := range tt.want {
				if !strings.Contains(errb.String(), w) {
					t.Errorf("stderr %q lacks %q", errb.String(), w)
				}
			}
		})
	}
}

// TestAdversarialShort runs the adversarial suite's short form against
// the built modegridd, a fresh process per row, and asserts outcomes
// only: each row's status codes, refusals before any work (the server's
// computation and q-point counters unchanged apart from compiling the
// model), every slot, queue place and byte of the memory budget released
// after the call (waited for by polling the metrics, with a hang limit and
// no time bound), the server still serving (health and a small DOS) and
// never exiting by itself. Times and peak memory are logged as the table,
// never asserted: they are the long form's figures (`make adversarial`).
func TestAdversarialShort(t *testing.T) {
	bin := daemonPath(t)
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Minute)
	defer cancel()
	var progress bytes.Buffer
	rows := adversarial(ctx, bin, false, "", &progress)
	var table bytes.Buffer
	printAdversarial(&table, rows, false)
	t.Logf("\n%s", table.String())
	if len(rows) < 10 {
		t.Fatalf("%d rows; want the whole short form", len(rows))
	}
	for _, r := range rows {
		if r.Pass() {
			continue
		}
		t.Errorf("%s: codes %v (want %s), work before refusal %v, released %v, serving %v, exits %d, exit code %d, suite error %q",
			r.Request, r.Codes, r.Want, r.WorkDone && r.kind == expectRefusal, r.Released, r.Serving, r.Exits, r.ExitCode, r.Err)
	}
}

package redis

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math/rand/v2"
	"net"
	"os"
	"os/exec"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	goredis "github.com/redis/go-redis/v9"

	"github.com/materials-lab/modegrid/server/cache"
)

const redisServerPath = "/usr/bin/redis-server"

// redisServer is a real redis-server process on a loopback port, started
// by the test with persistence off.
type redisServer struct {
	t     testing.TB
	addr  string
	cmd   *exec.Cmd
	dir   string
	extra []string // more redis-server arguments (e.g. --requirepass)
}

// startRedis starts redis-server on a free loopback port and waits until it
// accepts connections. The test is skipped, saying why, only when the binary
// is not installed (Debian package redis-server).
func startRedis(t testing.TB, extra ...string) *redisServer {
	t.Helper()
	if _, err := os.Stat(redisServerPath); err != nil {
		t.Skipf("redis-server not installed (%v): apt-get install redis-server", err)
	}
	s := &redisServer{t: t, addr: freeAddr(t), dir: t.TempDir(), extra: extra}
	s.start()
	t.Cleanup(s.stop)
	return s
}

// freeAddr returns a loopback address whose port was free a moment ago.
func freeAddr(t testing.TB) string {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().String()
}

// start runs redis-server on s.addr (again, after kill) and waits for the
// line saying it accepts connections.
func (s *redisServer) start() {
	s.t.Helper()
	_, port, _ := net.SplitHostPort(s.addr)
	args := append([]string{"--bind", "127.0.0.1", "--port", port,
		"--save", "", "--appendonly", "no", "--dir", s.dir, "--daemonize", "no",
		"--protected-mode", "yes", "--loglevel", "notice"}, s.extra...)
	cmd := exec.Command(redisServerPath, args...)
	out, err := cmd.StdoutPipe()
	if err != nil {
		s.t.Fatal(err)
	}
	cmd.Stderr = cmd.Stdout
	if err := cmd.Start(); err != nil {
		s.t.Fatalf("start redis-server: %v", err)
	}
	ready := make(chan error, 1)
	go func() {
		sc := bufio.NewScanner(out)
		var log strings.Builder
		for sc.Scan() {
			log.WriteString(sc.Text() + "\n")
			if strings.Contains(sc.Text(), "Ready to accept connections") {
				ready <- nil
				for sc.Scan() { // keep draining so redis never blocks on stdout
				}
				return
			}
		}
		ready <- fmt.Errorf("redis-server exited before it was ready:\n%s", log.String())
	}()
	select {
	case err := <-ready:
		if err != nil {
			cmd.Process.Kill()
			cmd.Wait()
			s.t.Fatal(err)
		}
	case <-time.After(10 * time.Second):
		cmd.Process.Kill()
		cmd.Wait()
		s.t.Fatal("redis-server not ready after 10 s")
	}
	s.cmd = cmd
}

// kill stops Redis abruptly (SIGKILL), as a crash would.
func (s *redisServer) kill() {
	if s.cmd == nil {
		return
	}
	s.cmd.Process.Kill()
	s.cmd.Wait()
	s.cmd = nil
}

func (s *redisServer) stop() { s.kill() }

// signal sends sig to the running server (SIGSTOP makes it hang: the kernel
// still accepts connections but nothing answers).
func (s *redisServer) signal(sig syscall.Signal) {
	s.t.Helper()
	if err := s.cmd.Process.Signal(sig); err != nil {
		s.t.Fatal(err)
	}
}

// admin is a plain go-redis client to inspect what the backend stored.
func (s *redisServer) admin() *goredis.Client {
	c := goredis.NewClient(&goredis.Options{Addr: s.addr})
	s.t.Cleanup(func() { c.Close() })
	return c
}

func testCtx(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	t.Cleanup(cancel)
	return ctx
}

func randomBytes(r *rand.Rand, n int) []byte {
	b := make([]byte, n)
	for i := range b {
		b[i] = byte(r.Uint32())
	}
	return b
}

// Backend is a cache.Backend (the interface the server's cache layer uses).
var _ cache.Backend = (*Backend)(nil)

// TestRedisSetGet: values round-trip byte for byte, including empty and
// binary values; absent keys are a miss without error; the key carries the
// modegrid prefix in Redis.
func TestRedisSetGet(t *testing.T) {
	srv := startRedis(t)
	r := New(Options{Addr: srv.addr})
	defer r.Close()
	ctx := testCtx(t)
	rng := rand.New(rand.NewPCG(8, 1))
	tests := []struct {
		name  string
		key   string
		value []byte
	}{
		{name: "small", key: "a1b2", value: []byte("result")},
		{name: "empty", key: "empty", value: []byte{}},
		{name: "binary with zeros", key: "bin", value: []byte{0, 1, 0, 255, 0}},
		{name: "one megabyte", key: "big", value: randomBytes(rng, 1<<20)},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if err := r.Set(ctx, tc.key, tc.value); err != nil {
				t.Fatalf("Set: %v", err)
			}
			got, ok, err := r.Get(ctx, tc.key)
			if err != nil || !ok {
				t.Fatalf("Get = ok %v, err %v; want a hit", ok, err)
			}
			if !bytes.Equal(got, tc.value) {
				t.Fatalf("Get returned %d bytes differing from the %d stored", len(got), len(tc.value))
			}
			if n, err := srv.admin().Exists(ctx, KeyPrefix+tc.key).Result(); err != nil || n != 1 {
				t.Errorf("key %q in Redis: exists=%d err=%v; want 1", KeyPrefix+tc.key, n, err)
			}
		})
	}
	t.Run("missing key", func(t *testing.T) {
		got, ok, err := r.Get(ctx, "never-set")
		if err != nil || ok || got != nil {
			t.Fatalf("Get = %v, %v, %v; want nil, false, nil", got, ok, err)
		}
	})
	t.Run("overwrite", func(t *testing.T) {
		if err := r.Set(ctx, "k", []byte("one")); err != nil {
			t.Fatal(err)
		}
		if err := r.Set(ctx, "k", []byte("two")); err != nil {
			t.Fatal(err)
		}
		if got, _, _ := r.Get(ctx, "k"); string(got) != "two" {
			t.Fatalf("got %q; want %q", got, "two")
		}
	})
}

// TestRedisTTL: every entry is stored with the configured TTL (Redis PTTL
// between 0 and TTL), the default when none is given, and an entry with a
// short TTL expires (Redis drops it; Get becomes a miss).
func TestRedisTTL(t *testing.T) {
	srv := startRedis(t)
	admin := srv.admin()
	ctx := testCtx(t)
	tests := []struct {
		name string
		ttl  time.Duration
		want time.Duration
	}{
		{name: "explicit hour", ttl: time.Hour, want: time.Hour},
		{name: "default", ttl: 0, want: DefaultTTL},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r := New(Options{Addr: srv.addr, TTL: tc.ttl})
			defer r.Close()
			if err := r.Set(ctx, tc.name, []byte("v")); err != nil {
				t.Fatal(err)
			}
			got, err := admin.PTTL(ctx, KeyPrefix+tc.name).Result()
			if err != nil {
				t.Fatal(err)
			}
			// A few seconds of slack covers the time between SET and PTTL.
			if got <= tc.want-5*time.Second || got > tc.want {
				t.Fatalf("PTTL = %v; want in (%v, %v]", got, tc.want-5*time.Second, tc.want)
			}
		})
	}
	t.Run("expires", func(t *testing.T) {
		r := New(Options{Addr: srv.addr, TTL: 50 * time.Millisecond})
		defer r.Close()
		if err := r.Set(ctx, "short", []byte("v")); err != nil {
			t.Fatal(err)
		}
		// Redis expires keys on access once their time is past; poll until
		// it has (bounded by the test context).
		tick := time.NewTicker(10 * time.Millisecond)
		defer tick.Stop()
		for {
			_, ok, err := r.Get(ctx, "short")
			if err != nil {
				t.Fatal(err)
			}
			if !ok {
				return
			}
			select {
			case <-ctx.Done():
				t.Fatal("entry with a 50 ms TTL still present when the test context ended")
			case <-tick.C:
			}
		}
	})
}

// TestRedisSizeCap: a value above MaxEntryBytes is skipped without error
// and counted; a value of exactly MaxEntryBytes is stored.
func TestRedisSizeCap(t *testing.T) {
	srv := startRedis(t)
	r := New(Options{Addr: srv.addr, MaxEntryBytes: 1000})
	defer r.Close()
	ctx := testCtx(t)
	tests := []struct {
		name    string
		size    int
		stored  bool
		skipped uint64 // cumulative SkippedTooLarge after this case
	}{
		{name: "under cap", size: 999, stored: true, skipped: 0},
		{name: "at cap", size: 1000, stored: true, skipped: 0},
		{name: "over cap", size: 1001, stored: false, skipped: 1},
		{name: "far over cap", size: 1 << 20, stored: false, skipped: 2},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			key := fmt.Sprintf("size-%d", tc.size)
			if err := r.Set(ctx, key, make([]byte, tc.size)); err != nil {
				t.Fatalf("Set: %v; want nil (a skip is not an error)", err)
			}
			_, ok, err := r.Get(ctx, key)
			if err != nil {
				t.Fatal(err)
			}
			if ok != tc.stored {
				t.Errorf("stored = %v; want %v", ok, tc.stored)
			}
			if got := r.SkippedTooLarge(); got != tc.skipped {
				t.Errorf("SkippedTooLarge = %d; want %d", got, tc.skipped)
			}
		})
	}
}

// TestRedisOutage: with Redis killed, Get and Set return errors (never
// hanging); with Redis hung (SIGSTOP: connections accepted, nothing
// answered) they return timeout errors from the backend's own timeout; once
// Redis is back the same backend works again without being rebuilt. No
// wall-clock bound is asserted (a shared machine makes any bound flaky):
// the durations are logged, and a call that hangs past hangAfter fails.
func TestRedisOutage(t *testing.T) {
	srv := startRedis(t)
	const timeout = 100 * time.Millisecond
	r := New(Options{Addr: srv.addr, Timeout: timeout})
	defer r.Close()
	ctx := testCtx(t)
	if err := r.Set(ctx, "before", []byte("v")); err != nil {
		t.Fatal(err)
	}
	// hangAfter detects a call that does not return at all (go-redis's own
	// defaults would be 3 s reads, 5 s dials with retries).
	const hangAfter = 30 * time.Second
	call := func(t *testing.T, what string, fn func() error) error {
		t.Helper()
		done := make(chan error, 1)
		start := time.Now()
		go func() { done <- fn() }()
		select {
		case err := <-done:
			t.Logf("%s returned after %v: %v", what, time.Since(start), err)
			return err
		case <-time.After(hangAfter):
			t.Fatalf("%s did not return within %v", what, hangAfter)
			return nil
		}
	}
	failing := func(t *testing.T, what string) {
		t.Helper()
		for i := range 30 { // more calls than the pool size, to open go-redis's dial breaker
			if err := call(t, fmt.Sprintf("%s: Get #%d", what, i), func() error { _, _, err := r.Get(ctx, "before"); return err }); err == nil {
				t.Fatalf("%s: Get #%d succeeded; want an error", what, i)
			}
			if err := call(t, fmt.Sprintf("%s: Set #%d", what, i), func() error { return r.Set(ctx, "during", []byte("v")) }); err == nil {
				t.Fatalf("%s: Set #%d succeeded; want an error", what, i)
			}
		}
	}
	t.Run("hung", func(t *testing.T) {
		srv.signal(syscall.SIGSTOP)
		// No deadline on the caller's context: a timeout can only come from
		// the backend's own Timeout.
		err := call(t, "Get on a stopped Redis", func() error { _, _, err := r.Get(context.Background(), "before"); return err })
		srv.signal(syscall.SIGCONT)
		if err == nil {
			t.Fatal("Get on a stopped Redis succeeded")
		}
		if !errors.Is(err, context.DeadlineExceeded) && !isTimeout(err) {
			t.Errorf("error %v is not a timeout", err)
		}
	})
	t.Run("killed", func(t *testing.T) {
		var logs lockedBuffer
		SetLogger(slog.New(slog.NewTextHandler(&logs, &slog.HandlerOptions{Level: slog.LevelDebug})))
		srv.kill()
		failing(t, "Redis killed")
		// go-redis's dial-failure lines went to slog at debug level.
		if out := logs.String(); !strings.Contains(out, "level=DEBUG") || !strings.Contains(out, "component=go-redis") {
			t.Errorf("go-redis logs not routed to slog at debug level; got:\n%s", out)
		}
	})
	t.Run("back", func(t *testing.T) {
		srv.start()
		// go-redis probes a dead server once a second in the background;
		// poll until the backend reconnects (bounded by the test context).
		tick := time.NewTicker(20 * time.Millisecond)
		defer tick.Stop()
		for r.Set(ctx, "after", []byte("again")) != nil {
			select {
			case <-ctx.Done():
				t.Fatal("backend did not recover after Redis restarted")
			case <-tick.C:
			}
		}
		got, ok, err := r.Get(ctx, "after")
		if err != nil || !ok || string(got) != "again" {
			t.Fatalf("Get after recovery = %q, %v, %v; want \"again\", true, nil", got, ok, err)
		}
		// The restarted Redis has no persistence: earlier entries are gone,
		// which is a miss, not an error.
		if _, ok, err := r.Get(ctx, "before"); ok || err != nil {
			t.Fatalf("Get of a pre-crash key = ok %v, err %v; want a clean miss", ok, err)
		}
	})
}

// lockedBuffer is an io.Writer safe for the go-redis goroutines that log
// while the test reads it.
type lockedBuffer struct {
	mu sync.Mutex // protects b
	b  bytes.Buffer
}

func (l *lockedBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

func (l *lockedBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

func isTimeout(err error) bool {
	var ne net.Error
	return errors.As(err, &ne) && ne.Timeout()
}

// TestRedisPassword: against a real Redis with requirepass, the right
// password works; a wrong one or none is an authentication error (a
// configuration error, not an outage) whose message does not contain the
// password. A Redis without requirepass takes any password (Redis's
// default user).
func TestRedisPassword(t *testing.T) {
	const secret = "s3cret-for-this-test-only"
	locked := startRedis(t, "--requirepass", secret)
	open := startRedis(t)
	ctx := testCtx(t)
	tests := []struct {
		name     string
		addr     string
		password string
		authErr  bool
	}{
		{name: "right password", addr: locked.addr, password: secret},
		{name: "wrong password", addr: locked.addr, password: "not-" + secret, authErr: true},
		{name: "no password", addr: locked.addr, authErr: true},
		{name: "password to a Redis without one", addr: open.addr, password: secret},
		{name: "no password, none required", addr: open.addr},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			opt := Options{Addr: tc.addr, Password: tc.password}
			r := New(opt)
			defer r.Close()
			err := r.Ping(ctx)
			if got := IsAuthError(err); got != tc.authErr {
				t.Fatalf("Ping: %v; IsAuthError = %v, want %v", err, got, tc.authErr)
			}
			if err != nil && strings.Contains(err.Error(), secret) {
				t.Errorf("error %q contains the password", err)
			}
			if s := opt.String(); strings.Contains(s, secret) {
				t.Errorf("options print as %q, with the password", s)
			}
			if tc.authErr {
				return
			}
			if err := r.Set(ctx, "k", []byte("v")); err != nil {
				t.Fatal(err)
			}
			if got, ok, err := r.Get(ctx, "k"); err != nil || !ok || string(got) != "v" {
				t.Fatalf("Get = %q, %v, %v; want v", got, ok, err)
			}
		})
	}
	if IsAuthError(errors.New("dial tcp 127.0.0.1:1: connect: connection refused")) {
		t.Error("a refused connection taken for an authentication error")
	}
}

// TestRedisCallerContext: a caller's context that is already cancelled
// makes the call fail at once instead of reaching Redis.
func TestRedisCallerContext(t *testing.T) {
	srv := startRedis(t)
	r := New(Options{Addr: srv.addr})
	defer r.Close()
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, _, err := r.Get(ctx, "x"); !errors.Is(err, context.Canceled) {
		t.Errorf("Get with a cancelled context: %v; want context.Canceled", err)
	}
	if err := r.Set(ctx, "x", []byte("v")); !errors.Is(err, context.Canceled) {
		t.Errorf("Set with a cancelled context: %v; want context.Canceled", err)
	}
}

// BenchmarkRedisGetSet measures one Set and one Get round trip to a
// loopback Redis for a 16 KiB value (about the size of a 201-sample
// dispersion of a 6-branch model).
func BenchmarkRedisGetSet(b *testing.B) {
	srv := startRedis(b)
	r := New(Options{Addr: srv.addr})
	defer r.Close()
	ctx := context.Background()
	v := randomBytes(rand.New(rand.NewPCG(8, 2)), 16<<10)
	b.SetBytes(int64(len(v)))
	b.ResetTimer()
	for b.Loop() {
		if err := r.Set(ctx, "bench", v); err != nil {
			b.Fatal(err)
		}
		if _, ok, err := r.Get(ctx, "bench"); err != nil || !ok {
			b.Fatalf("Get: ok %v err %v", ok, err)
		}
	}
}

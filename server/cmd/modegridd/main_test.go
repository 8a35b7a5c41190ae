package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"os"
	"os/exec"
	"strings"
	"syscall"
	"testing"
	"time"

	"go.uber.org/goleak"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
)

// TestMain doubles as modegridd itself when MODEGRID_TEST_AS_MAIN is set,
// so the signal test runs the real main in a child process.
func TestMain(m *testing.M) {
	if mode := os.Getenv("MODEGRID_TEST_AS_MAIN"); mode != "" {
		os.Args = append([]string{"modegridd"}, strings.Fields(os.Getenv("MODEGRID_TEST_ARGS"))...)
		// Not modegridd's own variables: it refuses unknown MODEGRID_*.
		os.Unsetenv("MODEGRID_TEST_AS_MAIN")
		os.Unsetenv("MODEGRID_TEST_ARGS")
		if mode == "crash" {
			crashAsMain()
		}
		main()
		return
	}
	goleak.VerifyTestMain(m)
}

func env(m map[string]string) func(string) string { return func(k string) string { return m[k] } }

func TestFlagsAndEnvironment(t *testing.T) {
	tests := []struct {
		name    string
		args    []string
		env     map[string]string
		check   func(t *testing.T, o *options)
		wantErr string
	}{
		{name: "defaults", check: func(t *testing.T, o *options) {
			if o.cfg.Listen != "127.0.0.1:7420" || o.cfg.MetricsListen != "127.0.0.1:9420" || o.cfg.CacheBytes != 512<<20 || o.cfg.DisableReflection {
				t.Errorf("defaults %+v", o.cfg)
			}
		}},
		{name: "environment", env: map[string]string{"MODEGRID_LISTEN": "0.0.0.0:1234", "MODEGRID_METRICS_LISTEN": "0.0.0.0:9999",
			"MODEGRID_CACHE_BYTES": "64MiB", "MODEGRID_REFLECTION": "false", "MODEGRID_SHUTDOWN_GRACE": "5s", "MODEGRID_REDIS_ADDR": "redis:6379"},
			check: func(t *testing.T, o *options) {
				if o.cfg.Listen != "0.0.0.0:1234" || o.cfg.MetricsListen != "0.0.0.0:9999" || o.cfg.CacheBytes != 64<<20 ||
					!o.cfg.DisableReflection || o.cfg.ShutdownGrace != 5*time.Second || o.redis.Addr != "redis:6379" {
					t.Errorf("from the environment: %+v, redis %q", o.cfg, o.redis.Addr)
				}
			}},
		{name: "flag wins over environment", args: []string{"--listen", "127.0.0.1:1"}, env: map[string]string{"MODEGRID_LISTEN": "127.0.0.1:2"},
			check: func(t *testing.T, o *options) {
				if o.cfg.Listen != "127.0.0.1:1" {
					t.Errorf("listen %q; want the flag's 127.0.0.1:1", o.cfg.Listen)
				}
			}},
		{name: "zero disables cache and queue", args: []string{"--cache-bytes=0", "--max-queue=0"}, check: func(t *testing.T, o *options) {
			if o.cfg.CacheBytes >= 0 || o.cfg.MaxQueue >= 0 {
				t.Errorf("cache %d, queue %d; want both negative (disabled)", o.cfg.CacheBytes, o.cfg.MaxQueue)
			}
		}},
		{name: "bad environment names the variable", env: map[string]string{"MODEGRID_MAX_QPOINTS": "many", "MODEGRID_CACHE_BYTES": "lots"},
			wantErr: "MODEGRID_MAX_QPOINTS"},
		{name: "bad configuration", args: []string{"--tls-cert", "x.pem"}, wantErr: "tls-cert/tls-key"},
		{name: "bad log level", args: []string{"--log-level", "loud"}, wantErr: "log-level"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			o, err := parse(tt.args, env(tt.env), &bytes.Buffer{})
			if tt.wantErr != "" {
				if err == nil || !strings.Contains(err.Error(), tt.wantErr) {
					t.Fatalf("got %v; want an error mentioning %s", err, tt.wantErr)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			tt.check(t, o)
		})
	}
}

func TestVersionFlag(t *testing.T) {
	var out bytes.Buffer
	if code := run(context.Background(), []string{"--version"}, &out, &bytes.Buffer{}); code != exitOK || !strings.Contains(out.String(), version) {
		t.Errorf("exit %d, output %q; want 0 and the version", code, out.String())
	}
	if code := run(context.Background(), []string{"--no-such-flag"}, &out, &bytes.Buffer{}); code != exitUsage {
		t.Errorf("unknown flag: exit %d; want %d", code, exitUsage)
	}
}

// TestSIGTERMStopsCleanly runs modegridd in a child process, waits for it
// to serve, checks health, sends SIGTERM and expects exit status 0.
func TestSIGTERMStopsCleanly(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), "MODEGRID_TEST_AS_MAIN=1",
		"MODEGRID_TEST_ARGS=--listen 127.0.0.1:0 --metrics-listen 127.0.0.1:0 --shutdown-grace 5s")
	stderr, err := cmd.StderrPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(stderr)
	var addr string
	var lines []string
	for addr == "" && sc.Scan() {
		lines = append(lines, sc.Text())
		var rec struct{ Msg, Addr string }
		if json.Unmarshal(sc.Bytes(), &rec) == nil && rec.Msg == "serving" {
			addr = rec.Addr
		}
	}
	if addr == "" {
		cmd.Process.Kill()
		cmd.Wait()
		t.Fatalf("no serving line; stderr: %v", lines)
	}
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	r, err := healthpb.NewHealthClient(conn).Check(ctx, &healthpb.HealthCheckRequest{})
	conn.Close()
	if err != nil || r.GetStatus() != healthpb.HealthCheckResponse_SERVING {
		t.Errorf("health: %v, %v; want SERVING", r.GetStatus(), err)
	}
	if err := cmd.Process.Signal(syscall.SIGTERM); err != nil {
		t.Fatal(err)
	}
	var rest []string
	for sc.Scan() {
		rest = append(rest, sc.Text())
	}
	if err := cmd.Wait(); err != nil {
		t.Errorf("modegridd after SIGTERM: %v; want exit status 0 (log %v)", err, rest)
	}
	if !strings.Contains(strings.Join(rest, "\n"), `"msg":"stopped"`) {
		t.Errorf("no stopped line in %v", rest)
	}
}

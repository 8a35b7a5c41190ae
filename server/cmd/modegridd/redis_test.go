package main

import (
	"bufio"
	"context"
	"encoding/json"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/redis/go-redis/v9"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"

	"github.com/materials-lab/modegrid/proto/examples"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
	"github.com/materials-lab/modegrid/server/internal/testredis"
)

const testPassword = "pw-of-this-test-7f3a9c"

// writeFile writes content to a new file in the test's directory.
func writeFile(t *testing.T, content string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), "password")
	if err := os.WriteFile(p, []byte(content), 0o600); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestRedisPasswordSources(t *testing.T) {
	tests := []struct {
		name    string
		file    string // file content; "-" for no file, "missing" for a path that does not exist
		env     string
		want    string
		wantErr string
	}{
		{name: "none", file: "-", want: ""},
		{name: "file with newline", file: testPassword + "\n", want: testPassword},
		{name: "file with CRLF", file: testPassword + "\r\n", want: testPassword},
		{name: "environment", file: "-", env: testPassword, want: testPassword},
		{name: "both", file: testPassword, env: testPassword, wantErr: "both set"},
		{name: "empty file", file: "\n", wantErr: "is empty"},
		{name: "two lines", file: testPassword + "\n" + testPassword + "\n", wantErr: "more than one line"},
		{name: "missing file", file: "missing", wantErr: "redis-password-file"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var path string
			switch tc.file {
			case "-":
			case "missing":
				path = filepath.Join(t.TempDir(), "nope")
			default:
				path = writeFile(t, tc.file)
			}
			got, err := redisPassword(path, env(map[string]string{redisPasswordEnv: tc.env}))
			if tc.wantErr != "" {
				if err == nil || !strings.Contains(err.Error(), tc.wantErr) {
					t.Fatalf("got %q, %v; want an error mentioning %q", got, err, tc.wantErr)
				}
				if strings.Contains(err.Error(), testPassword) {
					t.Errorf("error %q contains the password", err)
				}
				return
			}
			if err != nil || got != tc.want {
				t.Fatalf("got %q, %v; want %q", got, err, tc.want)
			}
		})
	}
}

// TestRedisRequirepass runs modegridd against a real Redis that requires a
// password: a wrong or missing password stops the start with a clear
// error; the right one (from a file or the environment) serves and fills
// the shared cache. The password never appears in modegridd's output.
func TestRedisRequirepass(t *testing.T) {
	addr := testredis.Start(t, testPassword)
	base := []string{"--listen", "127.0.0.1:0", "--metrics-listen", "off", "--redis-addr", addr}
	refused := []struct {
		name string
		args []string
		want string
	}{
		{name: "wrong password", args: []string{"--redis-password-file", writeFile(t, "not-"+testPassword+"\n")}, want: "WRONGPASS"},
		{name: "no password", want: "NOAUTH"},
	}
	for _, tc := range refused {
		t.Run(tc.name, func(t *testing.T) {
			var stderr strings.Builder
			code := run(testCtx(t), append(append([]string(nil), base...), tc.args...), io.Discard, &stderr)
			if code != exitFailed {
				t.Fatalf("exit %d; want %d. stderr:\n%s", code, exitFailed, stderr.String())
			}
			for _, want := range []string{"redis refused the credentials", addr, tc.want} {
				if !strings.Contains(stderr.String(), want) {
					t.Errorf("stderr lacks %q:\n%s", want, stderr.String())
				}
			}
			if strings.Contains(stderr.String(), testPassword) {
				t.Errorf("stderr contains the password:\n%s", stderr.String())
			}
		})
	}
	t.Run("right password from a file", func(t *testing.T) {
		serveWithRedis(t, addr, append(base, "--redis-password-file", writeFile(t, testPassword+"\n")))
	})
	t.Run("right password from the environment", func(t *testing.T) {
		t.Setenv(redisPasswordEnv, testPassword)
		serveWithRedis(t, addr, base)
	})
}

func testCtx(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	t.Cleanup(cancel)
	return ctx
}

// serveWithRedis runs modegridd with args until it serves, computes a DOS
// through it, checks that Redis now holds entries, and stops it.
func serveWithRedis(t *testing.T, redisAddr string, args []string) {
	t.Helper()
	admin := redis.NewClient(&redis.Options{Addr: redisAddr, Password: testPassword})
	defer admin.Close()
	ctx, stop := context.WithCancel(testCtx(t))
	defer stop()
	if err := admin.FlushAll(ctx).Err(); err != nil {
		t.Fatal(err)
	}
	pr, pw := io.Pipe()
	code := make(chan int, 1)
	go func() { code <- run(ctx, args, io.Discard, pw); pw.Close() }()
	var log []string
	sc := bufio.NewScanner(pr)
	grpcAddr := ""
	for grpcAddr == "" && sc.Scan() {
		log = append(log, sc.Text())
		var rec struct{ Msg, Addr string }
		if json.Unmarshal(sc.Bytes(), &rec) == nil && rec.Msg == "serving" {
			grpcAddr = rec.Addr
		}
	}
	if grpcAddr == "" {
		t.Fatalf("modegridd did not serve (exit %d); log:\n%s", <-code, strings.Join(log, "\n"))
	}
	drained := make(chan struct{})
	go func() {
		defer close(drained)
		for sc.Scan() {
			log = append(log, sc.Text())
		}
	}()
	conn, err := grpc.NewClient(grpcAddr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	crystal, err := examples.Load("chain")
	if err != nil {
		t.Fatal(err)
	}
	_, err = modegridv1.NewModegridServiceClient(conn).ComputeDos(ctx, &modegridv1.ComputeDosRequest{
		Model:   &modegridv1.ModelSource{Source: &modegridv1.ModelSource_Crystal{Crystal: crystal}},
		Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_Grid{Grid: &modegridv1.MonkhorstPackGrid{Mesh: []uint32{16}}}},
	})
	if err != nil {
		t.Fatalf("ComputeDos: %v", err)
	}
	if n, err := admin.DBSize(ctx).Result(); err != nil || n == 0 {
		t.Errorf("Redis holds %d keys (%v); want the model and the DOS", n, err)
	}
	stop()
	if c := <-code; c != exitOK {
		t.Errorf("exit %d; want 0", c)
	}
	<-drained // run returned and closed the pipe: the log is complete
	if joined := strings.Join(log, "\n"); strings.Contains(joined, testPassword) {
		t.Errorf("log contains the password:\n%s", joined)
	} else if !strings.Contains(joined, "redis cache connected") {
		t.Errorf("no \"redis cache connected\" line in:\n%s", joined)
	}
}

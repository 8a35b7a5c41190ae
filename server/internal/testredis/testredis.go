// Package testredis starts a real redis-server for the tests of the server
// and of modegridd. It is for tests only: no non-test package imports it.
package testredis

import (
	"bufio"
	"context"
	"net"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"testing"
)

// Bin is where the tests expect redis-server (the CI installs it there).
const Bin = "/usr/bin/redis-server"

// Start runs a real redis-server on a free loopback port, without
// persistence, until the test ends, and returns its address. A non-empty
// password is set as requirepass, given on standard input ("-" reads the
// configuration from it) as deploy/kubernetes/redis.yaml hands it over.
// The test is skipped when redis-server is not installed.
func Start(t *testing.T, password string) string {
	t.Helper()
	if _, err := os.Stat(Bin); err != nil {
		t.Skipf("%s not installed (the CI installs it): %v", Bin, err)
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	port := lis.Addr().(*net.TCPAddr).Port
	lis.Close()
	ctx, cancel := context.WithCancel(context.Background())
	var args []string
	if password != "" {
		args = append(args, "-")
	}
	args = append(args, "--port", strconv.Itoa(port), "--bind", "127.0.0.1",
		"--save", "", "--appendonly", "no", "--daemonize", "no", "--dir", t.TempDir())
	cmd := exec.CommandContext(ctx, Bin, args...)
	if password != "" {
		cmd.Stdin = strings.NewReader("requirepass " + password + "\n")
	}
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { cancel(); cmd.Wait() })
	sc := bufio.NewScanner(out)
	for sc.Scan() {
		if strings.Contains(sc.Text(), "Ready to accept connections") {
			go func() {
				for sc.Scan() {
				}
			}()
			return "127.0.0.1:" + strconv.Itoa(port)
		}
	}
	t.Fatalf("redis-server exited before it was ready: %v", sc.Err())
	return ""
}

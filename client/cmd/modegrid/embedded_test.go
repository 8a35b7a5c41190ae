package main

import (
	"bufio"
	"context"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/materials-lab/modegrid/proto/examples"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// TestEmbeddedOpensNoPort: the embedded server (no --server) answers real
// gRPC calls while this process holds no listening socket it did not hold
// before: nothing on TCP (v4 or v6) and nothing on a unix socket, so no
// other local user can call it. Linux only (it reads /proc).
func TestEmbeddedOpensNoPort(t *testing.T) {
	if _, err := os.Stat("/proc/self/fd"); err != nil {
		t.Skipf("no /proc (%v): the listening sockets cannot be listed here", err)
	}
	before := listeningSockets(t)
	c, stop, err := connect("")
	if err != nil {
		t.Fatal(err)
	}
	defer stop()
	crystal, err := examples.Load("chain")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	resp, err := c.Check(ctx, &modegridv1.CheckModelRequest{Model: &modegridv1.ModelSource{
		Source: &modegridv1.ModelSource_Crystal{Crystal: crystal}}})
	if err != nil {
		t.Fatalf("check through the embedded server: %v", err)
	}
	if resp.GetModelHash() == "" {
		t.Error("the embedded server answered without a model hash")
	}
	for inode, where := range listeningSockets(t) {
		if _, ok := before[inode]; !ok {
			t.Errorf("the embedded server listens on %s", where)
		}
	}
}

// TestEmbeddedIgnoresToken: a token in the environment is for --server; the
// embedded server checks none, and the CLI does not refuse to run (a token
// over an in-memory connection is not sent at all).
func TestEmbeddedIgnoresToken(t *testing.T) {
	t.Setenv("MODEGRID_TOKEN", "secret-for-a-remote-server")
	code, _, stderr := runCLI(t, "modes", "-m", example("chain"), "--q", "0.5")
	if code != exitOK {
		t.Fatalf("exit %d with MODEGRID_TOKEN set and no --server; stderr:\n%s", code, stderr)
	}
}

// listeningSockets returns the listening sockets this process holds, by
// inode, with a description: TCP sockets in state LISTEN from
// /proc/net/tcp{,6} and unix sockets with the accepting flag from
// /proc/net/unix, kept when one of /proc/self/fd points at their inode.
func listeningSockets(t *testing.T) map[string]string {
	t.Helper()
	mine := map[string]bool{}
	fds, err := os.ReadDir("/proc/self/fd")
	if err != nil {
		t.Fatal(err)
	}
	for _, fd := range fds {
		link, err := os.Readlink(filepath.Join("/proc/self/fd", fd.Name()))
		if err == nil && strings.HasPrefix(link, "socket:[") {
			mine[strings.TrimSuffix(strings.TrimPrefix(link, "socket:["), "]")] = true
		}
	}
	out := map[string]string{}
	const tcpListen = "0A"        // TCP_LISTEN in include/net/tcp_states.h
	const unixAcceptCon = 0x10000 // __SO_ACCEPTCON in include/uapi/linux/net.h
	for _, file := range []string{"/proc/net/tcp", "/proc/net/tcp6"} {
		for _, f := range procTable(t, file) {
			if len(f) > 9 && f[3] == tcpListen && mine[f[9]] {
				out[f[9]] = file + " " + f[1]
			}
		}
	}
	for _, f := range procTable(t, "/proc/net/unix") {
		if len(f) < 7 {
			continue
		}
		flags, err := strconv.ParseUint(f[3], 16, 64)
		if err == nil && flags&unixAcceptCon != 0 && mine[f[6]] {
			out[f[6]] = "unix socket " + strings.Join(f[7:], " ")
		}
	}
	return out
}

// procTable returns the whitespace-separated fields of each line of a
// /proc/net table after its header; an absent table (no IPv6) is empty.
func procTable(t *testing.T, file string) [][]string {
	t.Helper()
	f, err := os.Open(file)
	if os.IsNotExist(err) {
		return nil
	}
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var rows [][]string
	sc := bufio.NewScanner(f)
	for first := true; sc.Scan(); first = false {
		if !first {
			rows = append(rows, strings.Fields(sc.Text()))
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return rows
}

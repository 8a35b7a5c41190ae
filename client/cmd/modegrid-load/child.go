package main

// A modegridd child process: started on loopback ports, its addresses read
// from its "serving" log line, its memory read from /proc, its metrics
// scraped, and stopped with SIGTERM.

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"time"
)

// child is a running modegridd.
type child struct {
	cmd         *exec.Cmd
	addr        string // gRPC host:port
	metricsAddr string // /metrics host:port ("" when off)

	mu   sync.Mutex // protects tail
	tail []string   // last log lines, for error reports

	exited  chan struct{} // closed when the process has exited
	exitErr error         // Wait's result, set before exited is closed
}

// startChild runs bin with loopback listeners, the extra flags and the
// extra environment (NAME=VALUE, added to this process's), and waits (at
// most timeout) for it to log that it serves.
func startChild(ctx context.Context, bin string, extra, env []string, timeout time.Duration) (*child, error) {
	// The serving line is logged at info, so the child logs its calls too
	// (one line each, as in production); readLog drains them.
	args := append([]string{"--listen", "127.0.0.1:0", "--metrics-listen", "127.0.0.1:0"}, extra...)
	c := &child{cmd: exec.Command(bin, args...), exited: make(chan struct{})}
	c.cmd.Env = append(os.Environ(), env...)
	stderr, err := c.cmd.StderrPipe()
	if err != nil {
		return nil, err
	}
	if err := c.cmd.Start(); err != nil {
		return nil, fmt.Errorf("start %s: %w", bin, err)
	}
	ready := make(chan struct{})
	go c.readLog(stderr, ready)
	go func() {
		c.exitErr = c.cmd.Wait()
		close(c.exited)
	}()
	t := time.NewTimer(timeout)
	defer t.Stop()
	select {
	case <-ready:
		return c, nil
	case <-c.exited:
		return nil, fmt.Errorf("%s exited before serving: %v; log: %s", bin, c.exitErr, c.log())
	case <-t.C:
	case <-ctx.Done():
	}
	c.cmd.Process.Kill()
	<-c.exited
	return nil, fmt.Errorf("%s did not serve within %v; log: %s", bin, timeout, c.log())
}

// readLog reads the child's JSON log lines, closing ready at the serving
// line (whose addr and metrics_addr it records), keeping the last lines.
func (c *child) readLog(r io.Reader, ready chan struct{}) {
	sc := bufio.NewScanner(r)
	sc.Buffer(nil, 1<<20)
	served := false
	for sc.Scan() {
		line := sc.Text()
		c.mu.Lock()
		c.tail = append(c.tail, line)
		if len(c.tail) > 20 {
			c.tail = c.tail[1:]
		}
		c.mu.Unlock()
		if served {
			continue
		}
		var rec struct {
			Msg         string `json:"msg"`
			Addr        string `json:"addr"`
			MetricsAddr string `json:"metrics_addr"`
		}
		if json.Unmarshal([]byte(line), &rec) == nil && rec.Msg == "serving" {
			c.addr, c.metricsAddr, served = rec.Addr, rec.MetricsAddr, true
			close(ready)
		}
	}
}

// log is the child's last log lines.
func (c *child) log() string {
	c.mu.Lock()
	defer c.mu.Unlock()
	return strings.Join(c.tail, "\n")
}

// procStatus reads a "Vm…:   123 kB" field of /proc/<pid>/status, bytes.
func procStatus(pid int, field string) (uint64, error) {
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/status", pid))
	if err != nil {
		return 0, err
	}
	for _, line := range strings.Split(string(b), "\n") {
		if v, ok := strings.CutPrefix(line, field+":"); ok {
			kb, err := strconv.ParseUint(strings.TrimSuffix(strings.TrimSpace(v), " kB"), 10, 64)
			if err != nil {
				return 0, fmt.Errorf("/proc/%d/status %s: %w", pid, field, err)
			}
			return kb << 10, nil
		}
	}
	return 0, fmt.Errorf("/proc/%d/status has no %s", pid, field)
}

// peakRSS is the child's resident-set high-water mark (VmHWM), bytes.
func (c *child) peakRSS() (uint64, error) { return procStatus(c.cmd.Process.Pid, "VmHWM") }

// rss is the child's resident set now (VmRSS), bytes.
func (c *child) rss() (uint64, error) { return procStatus(c.cmd.Process.Pid, "VmRSS") }

// terminate sends SIGTERM.
func (c *child) terminate() error { return c.cmd.Process.Signal(syscall.SIGTERM) }

// wait waits at most timeout for the child to exit and returns its exit
// code; after the timeout it kills the child and reports that.
func (c *child) wait(timeout time.Duration) (int, error) {
	t := time.NewTimer(timeout)
	defer t.Stop()
	select {
	case <-c.exited:
	case <-t.C:
		c.cmd.Process.Kill()
		<-c.exited
		return -1, fmt.Errorf("modegridd did not exit within %v: killed", timeout)
	}
	var ee *exec.ExitError
	if errors.As(c.exitErr, &ee) {
		return ee.ExitCode(), nil
	}
	if c.exitErr != nil {
		return -1, c.exitErr
	}
	return 0, nil
}

// kill stops the child at once (clean-up after a failure).
func (c *child) kill() {
	select {
	case <-c.exited:
	default:
		c.cmd.Process.Kill()
		<-c.exited
	}
}

// scrape reads a Prometheus text endpoint into sample name (with labels,
// as printed) → value.
func scrape(ctx context.Context, url string) (map[string]float64, error) {
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, url, nil)
	if err != nil {
		return nil, err
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		return nil, err
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		return nil, fmt.Errorf("%s: %s", url, resp.Status)
	}
	out := map[string]float64{}
	sc := bufio.NewScanner(resp.Body)
	sc.Buffer(nil, 1<<20)
	for sc.Scan() {
		line := sc.Text()
		if line == "" || line[0] == '#' {
			continue
		}
		i := strings.LastIndexByte(line, ' ')
		if i < 0 {
			continue
		}
		v, err := strconv.ParseFloat(line[i+1:], 64)
		if err != nil {
			continue
		}
		out[line[:i]] = v
	}
	return out, sc.Err()
}

// sum adds the samples of family name (every label set).
func sum(m map[string]float64, name string) float64 {
	total := 0.0
	for k, v := range m {
		if k == name || strings.HasPrefix(k, name+"{") {
			total += v
		}
	}
	return total
}

package deploy

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	dto "github.com/prometheus/client_model/go"
	"github.com/prometheus/common/expfmt"
	"github.com/prometheus/common/model"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
)

// Paths of the system binaries the integration tests start (Debian
// packages redis-server and prometheus; .ci/run installs them).
const (
	redisServerPath = "/usr/bin/redis-server"
	prometheusPath  = "/usr/bin/prometheus"
	promtoolPath    = "/usr/bin/promtool"
)

// serviceName is the gRPC service whose health the tests wait for.
const serviceName = "modegrid.v1.ModegridService"

// testVersion is stamped into the test build, as the Dockerfile stamps the
// git version, so TestDaemonBinary can check that stamping works.
const testVersion = "v0.0.0-deploytest"

// repoRoot is the module root, the Docker build context.
var repoRoot = filepath.Join("..")

// build holds the modegridd binary, built once per test package run from the
// Dockerfile's own go build command (see dockerBuildCommand).
var build struct {
	dir  string // temp dir made by TestMain
	once sync.Once
	path string
	out  []byte // go build output, for the failure message
	err  error
}

func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "modegrid-deploy-test-")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	build.dir = dir
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}

// daemonBinary returns the path of modegridd built exactly as the
// Dockerfile builds it (static, trimmed, version-stamped), building it on
// first use.
func daemonBinary(t testing.TB) string {
	t.Helper()
	build.once.Do(func() {
		df, err := parseDockerfile(filepath.Join(repoRoot, "deploy", "Dockerfile"))
		if err != nil {
			build.err = err
			return
		}
		out := filepath.Join(build.dir, "modegridd")
		cmd, err := df.goBuildCommand(out, testVersion)
		if err != nil {
			build.err = err
			return
		}
		build.out, build.err = cmd.CombinedOutput()
		build.path = out
	})
	if build.err != nil {
		t.Fatalf("build modegridd as the Dockerfile does: %v\n%s", build.err, build.out)
	}
	return build.path
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

// lockedBuffer collects a child's output while the test may read it.
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

// daemon is one running modegridd process on loopback ports.
type daemon struct {
	t           testing.TB
	name        string
	grpcAddr    string
	metricsAddr string
	cmd         *exec.Cmd
	logs        lockedBuffer
	done        chan struct{} // closed when the process has exited
	waitErr     error         // exit status, valid after done
}

// daemonConfig configures startDaemon. Settings are passed the way the
// container passes them: as MODEGRID_* environment variables.
type daemonConfig struct {
	name  string
	redis string   // MODEGRID_REDIS_ADDR, empty for none
	env   []string // more KEY=VALUE settings
	args  []string // command-line flags
}

// startDaemon starts modegridd on fresh loopback ports and waits until its
// health service reports SERVING. The process is killed at test cleanup if
// still running.
func startDaemon(t testing.TB, c daemonConfig) *daemon {
	t.Helper()
	d := &daemon{t: t, name: c.name, grpcAddr: freeAddr(t), metricsAddr: freeAddr(t), done: make(chan struct{})}
	// exec uses the last value of a repeated key: the test's addresses win
	// over c.env (which may carry the container's ":7420").
	env := append(os.Environ(), c.env...)
	env = append(env,
		"MODEGRID_LISTEN="+d.grpcAddr,
		"MODEGRID_METRICS_LISTEN="+d.metricsAddr,
	)
	if c.redis != "" {
		env = append(env, "MODEGRID_REDIS_ADDR="+c.redis)
	}
	d.cmd = exec.Command(daemonBinary(t), c.args...)
	d.cmd.Env = env
	d.cmd.Stdout = &d.logs
	d.cmd.Stderr = &d.logs
	if err := d.cmd.Start(); err != nil {
		t.Fatalf("start %s: %v", c.name, err)
	}
	go func() {
		d.waitErr = d.cmd.Wait()
		close(d.done)
	}()
	t.Cleanup(func() {
		d.kill()
		if t.Failed() {
			t.Logf("%s log:\n%s", d.name, d.logs.String())
		}
	})
	d.waitServing()
	return d
}

// waitServing blocks until the daemon's health service reports SERVING for
// the modegrid service, failing the test if the process exits first or 30 s
// pass.
func (d *daemon) waitServing() {
	d.t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	errc := make(chan error, 1)
	go func() { errc <- waitHealth(ctx, d.grpcAddr) }()
	select {
	case err := <-errc:
		if err != nil {
			d.t.Fatalf("%s never reported SERVING: %v\nlog:\n%s", d.name, err, d.logs.String())
		}
	case <-d.done:
		d.t.Fatalf("%s exited before serving (%v)\nlog:\n%s", d.name, d.waitErr, d.logs.String())
	}
}

// waitHealth watches the standard gRPC health service at addr until the
// modegrid service is SERVING. WaitForReady makes the call wait for the
// server to listen instead of failing at once.
func waitHealth(ctx context.Context, addr string) error {
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		return err
	}
	defer conn.Close()
	stream, err := healthpb.NewHealthClient(conn).Watch(ctx, &healthpb.HealthCheckRequest{Service: serviceName}, grpc.WaitForReady(true))
	if err != nil {
		return err
	}
	for {
		r, err := stream.Recv()
		if err != nil {
			return err
		}
		if r.GetStatus() == healthpb.HealthCheckResponse_SERVING {
			return nil
		}
	}
}

// kill ends the process with SIGKILL, as a crashed node or the OOM killer
// would, and waits for it.
func (d *daemon) kill() {
	select {
	case <-d.done:
		return
	default:
	}
	d.cmd.Process.Kill()
	<-d.done
}

// terminate sends SIGTERM, as the kubelet and `docker stop` do, and returns
// the exit error (nil for exit status 0) once the process has exited, or an
// error if it has not within limit.
func (d *daemon) terminate(limit time.Duration) error {
	if err := d.cmd.Process.Signal(syscall.SIGTERM); err != nil {
		return err
	}
	select {
	case <-d.done:
		return d.waitErr
	case <-time.After(limit):
		return fmt.Errorf("%s still running %v after SIGTERM", d.name, limit)
	}
}

// metrics scrapes the daemon's /metrics endpoint and parses the Prometheus
// text format.
func (d *daemon) metrics(ctx context.Context) (map[string]*dto.MetricFamily, error) {
	return scrape(ctx, "http://"+d.metricsAddr+"/metrics")
}

func scrape(ctx context.Context, url string) (map[string]*dto.MetricFamily, error) {
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
		b, _ := io.ReadAll(resp.Body)
		return nil, fmt.Errorf("GET %s: %s: %s", url, resp.Status, b)
	}
	p := expfmt.NewTextParser(model.UTF8Validation)
	return p.TextToMetricFamilies(resp.Body)
}

// sumMetric adds up every sample of the counter or gauge name whose labels
// include all of match; a missing family sums to 0.
func sumMetric(fams map[string]*dto.MetricFamily, name string, match map[string]string) float64 {
	f, ok := fams[name]
	if !ok {
		return 0
	}
	var sum float64
	for _, m := range f.GetMetric() {
		if !labelsMatch(m, match) {
			continue
		}
		switch {
		case m.GetCounter() != nil:
			sum += m.GetCounter().GetValue()
		case m.GetGauge() != nil:
			sum += m.GetGauge().GetValue()
		case m.GetUntyped() != nil:
			sum += m.GetUntyped().GetValue()
		}
	}
	return sum
}

func labelsMatch(m *dto.Metric, match map[string]string) bool {
	for k, v := range match {
		found := false
		for _, lp := range m.GetLabel() {
			if lp.GetName() == k && lp.GetValue() == v {
				found = true
				break
			}
		}
		if !found {
			return false
		}
	}
	return true
}

// redisServer is a real redis-server on a loopback port, persistence off.
type redisServer struct {
	t    testing.TB
	addr string
	dir  string
	cmd  *exec.Cmd
	done chan struct{}
}

// startRedis starts redis-server on a free loopback port; the test is
// skipped, saying why, only when the Debian package is not installed.
func startRedis(t testing.TB) *redisServer {
	t.Helper()
	if _, err := os.Stat(redisServerPath); err != nil {
		t.Skipf("redis-server not installed (%v): apt-get install redis-server", err)
	}
	s := &redisServer{t: t, addr: freeAddr(t), dir: t.TempDir()}
	s.start()
	t.Cleanup(s.kill)
	return s
}

// start runs redis-server on s.addr (again, after kill) and waits for it to
// say it accepts connections.
func (s *redisServer) start() {
	s.t.Helper()
	_, port, _ := net.SplitHostPort(s.addr)
	cmd := exec.Command(redisServerPath, "--bind", "127.0.0.1", "--port", port,
		"--save", "", "--appendonly", "no", "--dir", s.dir, "--daemonize", "no")
	out, err := cmd.StdoutPipe()
	if err != nil {
		s.t.Fatal(err)
	}
	cmd.Stderr = cmd.Stdout
	if err := cmd.Start(); err != nil {
		s.t.Fatalf("start redis-server: %v", err)
	}
	if err := waitForLine(out, "Ready to accept connections", 10*time.Second); err != nil {
		cmd.Process.Kill()
		cmd.Wait()
		s.t.Fatalf("redis-server: %v", err)
	}
	s.cmd = cmd
	s.done = make(chan struct{})
	go func() { cmd.Wait(); close(s.done) }()
}

// kill stops Redis with SIGKILL, as a crash would.
func (s *redisServer) kill() {
	if s.cmd == nil {
		return
	}
	s.cmd.Process.Kill()
	<-s.done
	s.cmd = nil
}

// waitForLine reads r until a line containing want, then keeps draining r
// in the background so the child never blocks on a full pipe.
func waitForLine(r io.Reader, want string, limit time.Duration) error {
	found := make(chan error, 1)
	go func() {
		sc := bufio.NewScanner(r)
		var seen strings.Builder
		for sc.Scan() {
			if strings.Contains(sc.Text(), want) {
				found <- nil
				for sc.Scan() {
				}
				return
			}
			seen.WriteString(sc.Text() + "\n")
		}
		found <- fmt.Errorf("exited before printing %q:\n%s", want, seen.String())
	}()
	select {
	case err := <-found:
		return err
	case <-time.After(limit):
		return errors.New("no " + want + " within " + limit.String())
	}
}

// testContext is a context that ends when the test does or after limit.
func testContext(t testing.TB, limit time.Duration) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), limit)
	t.Cleanup(cancel)
	return ctx
}

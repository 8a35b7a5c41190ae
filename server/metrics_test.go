package server

import (
	"bytes"
	"io"
	"net"
	"net/http"
	"os"
	"os/exec"
	"strings"
	"testing"

	"github.com/prometheus/client_golang/prometheus/testutil"
	dto "github.com/prometheus/client_model/go"
	"github.com/prometheus/common/expfmt"
	"github.com/prometheus/common/model"
)

// scrape serves the metrics endpoint of ts on loopback and fetches it.
func scrape(t *testing.T, ts *testServer) []byte {
	t.Helper()
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	// Shutdown, in startServer's cleanup, stops this listener too.
	go ts.srv.ServeMetrics(lis)
	req, _ := http.NewRequestWithContext(testContext(t), http.MethodGet, "http://"+lis.Addr().String()+"/metrics", nil)
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	defer http.DefaultClient.CloseIdleConnections()
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("GET /metrics: %s", resp.Status)
	}
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestMetricsEndpoint: /metrics on its own HTTP port exposes the request,
// computation, cache, Go and process metrics with the right types, the
// request histogram reaches an hour, and no label carries a model hash.
func TestMetricsEndpoint(t *testing.T) {
	ts := startServer(t, Config{})
	if _, err := collectModes(testContext(t), ts.api, modesReq(t)); err != nil {
		t.Fatal(err)
	}
	body := scrape(t, ts)
	p := expfmt.NewTextParser(model.UTF8Validation)
	fams, err := p.TextToMetricFamilies(bytes.NewReader(body))
	if err != nil {
		t.Fatalf("parse /metrics: %v", err)
	}
	want := map[string]dto.MetricType{
		"grpc_server_started_total":               dto.MetricType_COUNTER,
		"grpc_server_handled_total":               dto.MetricType_COUNTER,
		"grpc_server_handling_seconds":            dto.MetricType_HISTOGRAM,
		"grpc_server_msg_sent_total":              dto.MetricType_COUNTER,
		"modegrid_computations_in_flight":         dto.MetricType_GAUGE,
		"modegrid_computations_queued":            dto.MetricType_GAUGE,
		"modegrid_computation_slots":              dto.MetricType_GAUGE,
		"modegrid_computations_total":             dto.MetricType_COUNTER,
		"modegrid_computations_canceled_total":    dto.MetricType_COUNTER,
		"modegrid_computations_rejected_total":    dto.MetricType_COUNTER,
		"modegrid_qpoints_diagonalized_total":     dto.MetricType_COUNTER,
		"modegrid_compute_duration_seconds":       dto.MetricType_HISTOGRAM,
		"modegrid_cache_hits_total":               dto.MetricType_COUNTER,
		"modegrid_cache_misses_total":             dto.MetricType_COUNTER,
		"modegrid_cache_evictions_total":          dto.MetricType_COUNTER,
		"modegrid_cache_bytes":                    dto.MetricType_GAUGE,
		"modegrid_cache_entries":                  dto.MetricType_GAUGE,
		"modegrid_cache_max_bytes":                dto.MetricType_GAUGE,
		"modegrid_cache_backend_errors_total":     dto.MetricType_COUNTER,
		"modegrid_cache_flight_joins_total":       dto.MetricType_COUNTER,
		"modegrid_cache_integrity_failures_total": dto.MetricType_COUNTER,
		"modegrid_panics_recovered_total":         dto.MetricType_COUNTER,
		"modegrid_auth_failures_total":            dto.MetricType_COUNTER,
		"modegrid_build_info":                     dto.MetricType_GAUGE,
		"go_goroutines":                           dto.MetricType_GAUGE,
		"go_gc_duration_seconds":                  dto.MetricType_SUMMARY,
		"process_cpu_seconds_total":               dto.MetricType_COUNTER,
		"process_resident_memory_bytes":           dto.MetricType_GAUGE,
		"modegrid_cache_refused_total":            dto.MetricType_COUNTER,
		"grpc_server_msg_received_total":          dto.MetricType_COUNTER,
		"process_start_time_seconds":              dto.MetricType_GAUGE,
		"go_memstats_heap_alloc_bytes":            dto.MetricType_GAUGE,
		"promhttp_metric_handler_errors_total":    dto.MetricType_COUNTER,
		"modegrid_uploads_total":                  dto.MetricType_COUNTER,
		"modegrid_upload_received_bytes_total":    dto.MetricType_COUNTER,
		"modegrid_uploads_in_flight":              dto.MetricType_GAUGE,
	}
	for name, typ := range want {
		f, ok := fams[name]
		if !ok {
			t.Errorf("metric %s missing", name)
			continue
		}
		if f.GetType() != typ {
			t.Errorf("%s has type %v; want %v", name, f.GetType(), typ)
		}
	}
	// The request histogram reaches the longest computations.
	h := fams["grpc_server_handling_seconds"]
	top := 0.0
	for _, m := range h.GetMetric() {
		for _, b := range m.GetHistogram().GetBucket() {
			top = max(top, b.GetUpperBound())
		}
	}
	if top < 3600 {
		t.Errorf("largest request latency bucket %v s; want ≥ 3600", top)
	}
	// The call just made is counted by method and code.
	if n := metric(t, ts.srv.Registry(), "grpc_server_handled_total", map[string]string{"grpc_method": "ComputeModes", "grpc_code": "OK"}); n != 1 {
		t.Errorf("handled{ComputeModes, OK} = %v; want 1", n)
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_qpoints_diagonalized_total", nil); n != 2 {
		t.Errorf("q-points diagonalised %v; want 2", n)
	}
	// Low-cardinality labels only.
	allowed := map[string]bool{"grpc_method": true, "grpc_service": true, "grpc_type": true, "grpc_code": true,
		"kind": true, "level": true, "reason": true, "le": true, "quantile": true, "version": true, "goversion": true, "eigensolver": true, "cause": true, "tier": true,
		"result": true} // result: the eight outcomes of an upload (upload.go)
	for name, f := range fams {
		if !strings.HasPrefix(name, "modegrid_") && !strings.HasPrefix(name, "grpc_") {
			continue
		}
		for _, m := range f.GetMetric() {
			for _, lp := range m.GetLabel() {
				if !allowed[lp.GetName()] {
					t.Errorf("%s has label %s; only low-cardinality labels allowed", name, lp.GetName())
				}
			}
		}
	}
	// The real Prometheus tool agrees the exposition is well formed.
	if _, err := os.Stat("/usr/bin/promtool"); err == nil {
		cmd := exec.CommandContext(testContext(t), "/usr/bin/promtool", "check", "metrics")
		cmd.Stdin = bytes.NewReader(body)
		out, err := cmd.CombinedOutput()
		if err != nil {
			t.Errorf("promtool check metrics: %v\n%s", err, out)
		}
	}
}

// TestMetricsLint: the registry passes client_golang's linter (names in
// base units, counters ending in _total, help on every metric).
func TestMetricsLint(t *testing.T) {
	ts := startServer(t, Config{})
	if _, err := collectModes(testContext(t), ts.api, modesReq(t)); err != nil {
		t.Fatal(err)
	}
	problems, err := testutil.GatherAndLint(ts.srv.Registry())
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		t.Errorf("lint: %s: %s", p.Metric, p.Text)
	}
}

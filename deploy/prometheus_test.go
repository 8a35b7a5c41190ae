package deploy

import (
	"context"
	"encoding/json"
	"fmt"
	"net/http"
	"net/url"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"sigs.k8s.io/yaml"
)

var promDir = filepath.Join(repoRoot, "deploy", "prometheus")

func needBinary(t *testing.T, path, pkg string) {
	t.Helper()
	if _, err := os.Stat(path); err != nil {
		t.Skipf("%s not installed (%v): apt-get install %s", path, err, pkg)
	}
}

// TestPromtool runs Debian's promtool on the Prometheus files: both scrape
// configurations and the rules they load are valid, and the alert rules
// pass their unit tests (alerts_test.yml: each alert fires on a bad series
// and stays silent on a healthy one).
func TestPromtool(t *testing.T) {
	needBinary(t, promtoolPath, "prometheus")
	tests := []struct {
		name string
		args []string
	}{
		{name: "kubernetes config", args: []string{"check", "config", "prometheus.yml"}},
		{name: "single-host config", args: []string{"check", "config", "single-host.yml"}},
		{name: "rules", args: []string{"check", "rules", "alerts.yml"}},
		{name: "rule unit tests", args: []string{"test", "rules", "alerts_test.yml"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			cmd := exec.Command(promtoolPath, tc.args...)
			cmd.Dir = promDir
			out, err := cmd.CombinedOutput()
			if err != nil {
				t.Fatalf("promtool %s: %v\n%s", strings.Join(tc.args, " "), err, out)
			}
			if !strings.Contains(string(out), "SUCCESS") {
				t.Errorf("promtool %s printed no SUCCESS:\n%s", strings.Join(tc.args, " "), out)
			}
		})
	}
}

// promConfig is the part of a Prometheus configuration file the tests read.
type promConfig struct {
	RuleFiles     []string `json:"rule_files"`
	ScrapeConfigs []struct {
		JobName       string `json:"job_name"`
		StaticConfigs []struct {
			Targets []string `json:"targets"`
		} `json:"static_configs"`
		DNSSDConfigs []struct {
			Names []string `json:"names"`
			Type  string   `json:"type"`
			Port  int      `json:"port"`
		} `json:"dns_sd_configs"`
	} `json:"scrape_configs"`
}

// alertRules is the rule file: groups of alerting rules.
type alertRules struct {
	Groups []struct {
		Name  string `json:"name"`
		Rules []struct {
			Alert  string            `json:"alert"`
			Expr   string            `json:"expr"`
			Labels map[string]string `json:"labels"`
		} `json:"rules"`
	} `json:"groups"`
}

func readYAML(t *testing.T, file string, v any) {
	t.Helper()
	b, err := os.ReadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	if err := yaml.Unmarshal(b, v); err != nil {
		t.Fatalf("%s: %v", file, err)
	}
}

// TestScrapeConfigMatchesManifests: the Kubernetes scrape configuration
// discovers pods through the headless Service the manifests define, on the
// container's metrics port, under the job name the alert rules select;
// every alert has a severity and selects that job.
func TestScrapeConfigMatchesManifests(t *testing.T) {
	var cfg promConfig
	readYAML(t, filepath.Join(promDir, "prometheus.yml"), &cfg)
	if len(cfg.ScrapeConfigs) != 1 || len(cfg.ScrapeConfigs[0].DNSSDConfigs) != 1 {
		t.Fatalf("want one scrape job with one dns_sd_config; got %+v", cfg.ScrapeConfigs)
	}
	job := cfg.ScrapeConfigs[0]
	sd := job.DNSSDConfigs[0]
	m := loadManifests(t)
	_, c := m.server(t)
	for _, name := range sd.Names {
		svc, ok := m.services[strings.Split(name, ".")[0]]
		if !ok || svc.Spec.ClusterIP != "None" {
			t.Errorf("dns_sd name %q is not a headless Service of the manifests", name)
		}
	}
	var metricsPort int32
	for _, p := range c.Ports {
		if p.Name == "metrics" {
			metricsPort = p.ContainerPort
		}
	}
	if sd.Type != "A" || int32(sd.Port) != metricsPort {
		t.Errorf("dns_sd type %s port %d; want A records and the metrics port %d", sd.Type, sd.Port, metricsPort)
	}
	var rules alertRules
	readYAML(t, filepath.Join(promDir, "alerts.yml"), &rules)
	n := 0
	for _, g := range rules.Groups {
		for _, r := range g.Rules {
			n++
			if !strings.Contains(r.Expr, `job="`+job.JobName+`"`) {
				t.Errorf("alert %s does not select job=%q", r.Alert, job.JobName)
			}
			if s := r.Labels["severity"]; s != "page" && s != "warning" {
				t.Errorf("alert %s severity %q; want page or warning", r.Alert, s)
			}
		}
	}
	if n == 0 {
		t.Fatal("no alert rules")
	}
}

// metricNamesInRules returns the metric names an alert expression uses
// (identifiers followed by a label selector), with histogram suffixes
// removed so they name the exported family.
func metricNamesInRules(t *testing.T) map[string][]string {
	t.Helper()
	var rules alertRules
	readYAML(t, filepath.Join(promDir, "alerts.yml"), &rules)
	names := map[string][]string{}
	re := regexp.MustCompile(`\b([a-zA-Z_:][a-zA-Z0-9_:]*)\{`)
	for _, g := range rules.Groups {
		for _, r := range g.Rules {
			for _, m := range re.FindAllStringSubmatch(r.Expr, -1) {
				n := m[1]
				for _, suf := range []string{"_bucket", "_sum", "_count"} {
					n = strings.TrimSuffix(n, suf)
				}
				if !slices.Contains(names[n], r.Alert) {
					names[n] = append(names[n], r.Alert)
				}
			}
		}
	}
	return names
}

// TestAlertMetricsExported: every metric the alert rules use is exported by
// a running modegridd after some traffic (so a renamed metric cannot leave
// an alert silently watching nothing). "up" comes from Prometheus itself.
func TestAlertMetricsExported(t *testing.T) {
	d := startDaemon(t, daemonConfig{name: "metrics"})
	ctx := testContext(t, 30*time.Second)
	cl := dialClient(t, d.grpcAddr)
	for i := range 3 {
		if _, err := cl.Modes(ctx, modesRequest(t, "chain", []float64{0.1 * float64(i+1)})); err != nil {
			t.Fatal(err)
		}
	}
	fams, err := d.metrics(ctx)
	if err != nil {
		t.Fatal(err)
	}
	for name, alerts := range metricNamesInRules(t) {
		if name == "up" {
			continue
		}
		if _, ok := fams[name]; !ok {
			t.Errorf("alerts %v use %s, which modegridd does not export", alerts, name)
		}
	}
}

// TestPrometheusScrapesModegrid runs a real Prometheus (Debian's package)
// on loopback with single-host.yml (its target moved to a running
// modegridd, intervals shortened to 1 s, temp-dir storage), sends traffic,
// and asks Prometheus's HTTP API for the request counter: it must equal the
// number of calls made, per status code. The target must be up and every
// alert rule must evaluate without error against the real series.
func TestPrometheusScrapesModegrid(t *testing.T) {
	needBinary(t, prometheusPath, "prometheus")
	d := startDaemon(t, daemonConfig{name: "scraped"})
	ctx := testContext(t, 60*time.Second)

	// single-host.yml, pointed at this daemon with short intervals.
	var cfg map[string]any
	readYAML(t, filepath.Join(promDir, "single-host.yml"), &cfg)
	cfg["global"] = map[string]any{"scrape_interval": "1s", "scrape_timeout": "1s", "evaluation_interval": "1s"}
	abs, err := filepath.Abs(filepath.Join(promDir, "alerts.yml"))
	if err != nil {
		t.Fatal(err)
	}
	cfg["rule_files"] = []string{abs}
	jobs := cfg["scrape_configs"].([]any)
	job := jobs[0].(map[string]any)
	job["static_configs"] = []any{map[string]any{"targets": []string{d.metricsAddr}}}
	b, err := yaml.Marshal(cfg)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	cfgFile := filepath.Join(dir, "prometheus.yml")
	if err := os.WriteFile(cfgFile, b, 0o644); err != nil {
		t.Fatal(err)
	}
	promAddr := freeAddr(t)
	var logs lockedBuffer
	cmd := exec.Command(prometheusPath,
		"--config.file="+cfgFile,
		"--storage.tsdb.path="+filepath.Join(dir, "data"),
		"--web.listen-address="+promAddr,
		"--log.level=warn",
	)
	cmd.Stdout, cmd.Stderr = &logs, &logs
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	exited := make(chan struct{})
	go func() { cmd.Wait(); close(exited) }()
	t.Cleanup(func() {
		cmd.Process.Kill()
		<-exited
		if t.Failed() {
			t.Logf("prometheus log:\n%s", logs.String())
		}
	})
	api := "http://" + promAddr
	poll(t, ctx, "Prometheus ready", func() (bool, error) {
		select {
		case <-exited:
			return false, fmt.Errorf("prometheus exited:\n%s", logs.String())
		default:
		}
		resp, err := http.Get(api + "/-/ready")
		if err != nil {
			return false, nil
		}
		resp.Body.Close()
		return resp.StatusCode == http.StatusOK, nil
	})

	// Traffic: okCalls good calls and one invalid model.
	const okCalls = 40
	cl := dialClient(t, d.grpcAddr)
	for i := range okCalls {
		if _, err := cl.Modes(ctx, modesRequest(t, "diatomic-chain", []float64{float64(i) / okCalls})); err != nil {
			t.Fatal(err)
		}
	}
	bad := modesRequest(t, "chain", []float64{0})
	bad.GetModel().GetCrystal().GetSites()[0].MassAmu = -1
	if _, err := cl.Modes(ctx, bad); err == nil {
		t.Fatal("invalid model accepted")
	}

	tests := []struct {
		name  string
		query string
		want  float64
	}{
		{name: "OK calls", query: `sum(grpc_server_handled_total{job="modegrid",grpc_method="ComputeModes",grpc_code="OK"})`, want: okCalls},
		{name: "invalid calls", query: `sum(grpc_server_handled_total{job="modegrid",grpc_method="ComputeModes",grpc_code="InvalidArgument"})`, want: 1},
		{name: "target up", query: `up{job="modegrid"}`, want: 1},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			poll(t, ctx, tc.query+" = "+strconv.FormatFloat(tc.want, 'g', -1, 64), func() (bool, error) {
				v, ok, err := promQuery(ctx, api, tc.query)
				if err != nil || !ok {
					return false, err
				}
				if v > tc.want {
					return false, fmt.Errorf("%s = %v; want %v", tc.query, v, tc.want)
				}
				return v == tc.want, nil
			})
		})
	}

	t.Run("rules evaluate", func(t *testing.T) {
		var rules alertRules
		readYAML(t, filepath.Join(promDir, "alerts.yml"), &rules)
		want := 0
		for _, g := range rules.Groups {
			want += len(g.Rules)
		}
		poll(t, ctx, "every rule evaluated with health ok", func() (bool, error) {
			var r struct {
				Data struct {
					Groups []struct {
						Rules []struct {
							Name      string `json:"name"`
							Health    string `json:"health"`
							LastError string `json:"lastError"`
						} `json:"rules"`
					} `json:"groups"`
				} `json:"data"`
			}
			if err := promGet(ctx, api+"/api/v1/rules", &r); err != nil {
				return false, err
			}
			ok := 0
			for _, g := range r.Data.Groups {
				for _, rule := range g.Rules {
					switch rule.Health {
					case "ok":
						ok++
					case "err":
						return false, fmt.Errorf("rule %s: %s", rule.Name, rule.LastError)
					}
				}
			}
			return ok == want, nil
		})
	})
}

// poll calls check every 100 ms until it reports true, fails the test on
// an error, and fails when ctx ends first.
func poll(t *testing.T, ctx context.Context, what string, check func() (bool, error)) {
	t.Helper()
	tick := time.NewTicker(100 * time.Millisecond)
	defer tick.Stop()
	for {
		done, err := check()
		if err != nil {
			t.Fatalf("%s: %v", what, err)
		}
		if done {
			return
		}
		select {
		case <-ctx.Done():
			t.Fatalf("%s: not reached before the test deadline", what)
		case <-tick.C:
		}
	}
}

// promGet GETs a Prometheus API URL and decodes the JSON answer.
func promGet(ctx context.Context, u string, v any) error {
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, u, nil)
	if err != nil {
		return err
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		return err
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		return fmt.Errorf("GET %s: %s", u, resp.Status)
	}
	return json.NewDecoder(resp.Body).Decode(v)
}

// promQuery runs an instant query that yields one sample; ok is false while
// the query has no result yet.
func promQuery(ctx context.Context, api, query string) (v float64, ok bool, err error) {
	var r struct {
		Status string `json:"status"`
		Data   struct {
			Result []struct {
				Value [2]any `json:"value"`
			} `json:"result"`
		} `json:"data"`
	}
	if err := promGet(ctx, api+"/api/v1/query?query="+url.QueryEscape(query), &r); err != nil {
		return 0, false, err
	}
	if r.Status != "success" {
		return 0, false, fmt.Errorf("query %s: status %s", query, r.Status)
	}
	if len(r.Data.Result) == 0 {
		return 0, false, nil
	}
	if len(r.Data.Result) > 1 {
		return 0, false, fmt.Errorf("query %s: %d series; want one", query, len(r.Data.Result))
	}
	s, _ := r.Data.Result[0].Value[1].(string)
	v, err = strconv.ParseFloat(s, 64)
	return v, err == nil, err
}

// Command modegrid-load drives a modegrid server with a fixed number of
// concurrent callers for a fixed time, mixing cached requests (a warm set
// answered from the server's cache) and cold ones (never sent before, so
// the server computes), and reports throughput, latency percentiles,
// errors by status code and the server's peak memory.
//
// Usage:
//
//	modegrid-load --spawn bin/modegridd [--server-args "--max-concurrent 2"] [flags]
//	modegrid-load --server 127.0.0.1:7420 [--metrics http://127.0.0.1:9420/metrics] [flags]
//	modegrid-load --spawn bin/modegridd --adversarial [--long] [--json]
//
// With --spawn it starts that modegridd as a child on loopback ports and
// reads its peak resident set (VmHWM) from /proc; with --server it samples
// process_resident_memory_bytes from --metrics, if given. --sigterm-after
// (with --spawn) sends the child SIGTERM part-way, once every caller has a
// call on the wire (its request sent: a call still being set up when the
// server stops is refused by the stopping server's transport and is no
// call of its), and reports how each of those calls ended and how long the
// child took to exit.
//
// With --adversarial it runs the adversarial suite instead of a load (see
// adversarial.go): each request that once took a replica down, and
// variants, against a fresh modegridd child (started with GOMEMLIMIT=2700MiB
// and the test-only --unsafe-fault-injection), printing a markdown table
// of status, time to refuse, release after cancellation, peak RSS, still
// serving and process exits. The short form runs in seconds (and in go
// test); --long sends the requests at full size (`make adversarial`).
//
// Calls are made with the client library (package client) on one
// connection, without retries and without waiting for a server that is not
// ready (WithMaxAttempts(1), WithFailFast), so every status the server
// returns, and every refusal while it is down, is counted as it came. A response that is OK but incomplete (a modes
// stream short of its total, a DOS without values) is counted apart as
// "incomplete"; there should never be one.
package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"slices"
	"sort"
	"strings"
	"sync"
	"text/tabwriter"
	"time"

	"github.com/materials-lab/modegrid/client"
	"github.com/materials-lab/modegrid/proto/examples"
)

// report is the outcome of a run (printed as a table, or as JSON).
type report struct {
	Target         string  `json:"target"`
	Concurrency    int     `json:"concurrency"`
	DurationS      float64 `json:"duration_s"`
	CachedFraction float64 `json:"cached_fraction"`
	Calls          int     `json:"calls"`
	ThroughputPerS float64 `json:"throughput_per_s"`
	All            stats   `json:"all"`
	Cached         stats   `json:"cached"`
	Cold           stats   `json:"cold"`

	Server  *serverStats  `json:"server,omitempty"`
	Sigterm *sigtermStats `json:"sigterm,omitempty"`
}

// serverStats is what the server said about itself.
type serverStats struct {
	PeakRSSBytes     uint64             `json:"peak_rss_bytes"`
	RSSSource        string             `json:"rss_source"`
	CacheMaxBytes    float64            `json:"cache_max_bytes"`
	CacheBytes       float64            `json:"cache_bytes"`
	CacheEvictions   float64            `json:"cache_evictions"`
	Rejected         map[string]float64 `json:"rejected"`
	GoroutinesBefore float64            `json:"goroutines_before"`
	GoroutinesAfter  float64            `json:"goroutines_after"`
	ExitCode         int                `json:"exit_code"`
}

// sigtermStats describes the calls on the wire when SIGTERM was sent.
type sigtermStats struct {
	InFlight         int            `json:"in_flight"`
	Codes            map[string]int `json:"codes"`
	Incomplete       int            `json:"incomplete"`
	MaxAfterSignalMs float64        `json:"max_after_signal_ms"`
	ExitCode         int            `json:"exit_code"`
	ExitAfterMs      float64        `json:"exit_after_ms"`
	StartedAfter     int            `json:"started_after"` // calls not yet on the wire when the signal went out
}

func main() {
	os.Exit(run(context.Background(), os.Args[1:], os.Stdout, os.Stderr))
}

// options are the parsed command line.
type options struct {
	cfg          config
	spawn        string
	serverArgs   string
	serverEnv    string
	metrics      string
	sigtermAfter time.Duration
	jsonOut      bool
	adversarial  bool   // run the adversarial suite instead of a load
	long         bool   // the suite's long form
	only         string // with adversarial: only the rows whose request contains this
}

// rawFlags are the flags that options holds only once converted: lists
// to split, files to turn into dial options.
type rawFlags struct {
	models, kinds        string // comma-separated
	mesh                 uint
	token, ca, cert, key string
}

// parseFlags parses the command line and reports every violation at once.
func parseFlags(args []string, stderr io.Writer) (*options, error) {
	o := &options{}
	var raw rawFlags
	fs := newFlagSet(o, &raw, stderr)
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	errs := o.check(raw.mesh)
	errs = append(errs, o.resolve(raw)...)
	return o, errors.Join(errs...)
}

// newFlagSet defines the flags, writing into o and raw.
func newFlagSet(o *options, raw *rawFlags, stderr io.Writer) *flag.FlagSet {
	fs := flag.NewFlagSet("modegrid-load", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.StringVar(&o.cfg.target, "server", "", "address of a running modegridd (host:port)")
	fs.StringVar(&o.spawn, "spawn", "", "path of a modegridd binary to start as a child on loopback ports")
	fs.StringVar(&o.serverArgs, "server-args", "", "extra flags for the spawned modegridd, space-separated")
	fs.StringVar(&o.serverEnv, "server-env", "", "extra environment of the spawned modegridd, space-separated NAME=VALUE (e.g. GOMEMLIMIT=128MiB)")
	fs.StringVar(&o.metrics, "metrics", "", "Prometheus /metrics URL of --server, to sample its memory")
	fs.IntVar(&o.cfg.concurrency, "c", 8, "concurrent callers, each with one call in flight")
	fs.DurationVar(&o.cfg.duration, "d", 10*time.Second, "how long callers start new calls")
	fs.Float64Var(&o.cfg.cached, "cached", 0.8, "fraction of calls drawn from the warm (cached) set")
	fs.StringVar(&raw.models, "models", strings.Join(examples.Names(), ","), "example crystals to use, comma-separated")
	fs.UintVar(&raw.mesh, "grid", 12, "grid divisions per direction of DOS and thermal calls on 3D models (2D: 2.5×, 1D: 20×)")
	fs.IntVar(&o.cfg.modesPoints, "modes-points", 64, "q-points of a cold modes call")
	fs.StringVar(&raw.kinds, "cold-kinds", strings.Join(coldKinds, ","), "kinds of cold calls, comma-separated")
	fs.DurationVar(&o.cfg.callTimeout, "timeout", 30*time.Second, "deadline of each call")
	fs.Uint64Var(&o.cfg.seed, "seed", 1, "seed of the request mix (math/rand/v2 PCG)")
	fs.DurationVar(&o.sigtermAfter, "sigterm-after", 0, "with --spawn: send SIGTERM after this long, once every caller has a call on the wire")
	fs.BoolVar(&o.jsonOut, "json", false, "print the report as JSON")
	fs.BoolVar(&o.adversarial, "adversarial", false, "with --spawn: run the adversarial suite (a fresh server per request; markdown table) instead of a load")
	fs.StringVar(&o.only, "only", "", "with --adversarial: run only the rows whose request contains this text")
	fs.BoolVar(&o.long, "long", false, "with --adversarial: the long form (the requests at full size; minutes)")
	fs.StringVar(&raw.token, "token", "", "bearer token")
	fs.StringVar(&raw.ca, "ca", "", "CA file: use TLS and trust it")
	fs.StringVar(&raw.cert, "cert", "", "client certificate file (mutual TLS; with --key)")
	fs.StringVar(&raw.key, "key", "", "client key file")
	fs.Usage = func() {
		fmt.Fprintf(fs.Output(), "usage: modegrid-load (--spawn BIN | --server ADDR) [flags]\n\n")
		fs.PrintDefaults()
	}
	return fs
}

// check returns every violation among the parsed options and --grid.
func (o *options) check(mesh uint) []error {
	var errs []error
	if (o.cfg.target == "") == (o.spawn == "") {
		errs = append(errs, errors.New("give exactly one of --server and --spawn"))
	}
	if o.sigtermAfter > 0 && (o.spawn == "" || o.sigtermAfter >= o.cfg.duration) {
		errs = append(errs, errors.New("--sigterm-after needs --spawn and must be shorter than -d"))
	}
	if o.adversarial && o.spawn == "" {
		errs = append(errs, errors.New("--adversarial needs --spawn (every request gets a fresh server)"))
	}
	if o.long && !o.adversarial {
		errs = append(errs, errors.New("--long goes with --adversarial"))
	}
	if o.cfg.concurrency < 1 {
		errs = append(errs, fmt.Errorf("-c must be ≥ 1, got %d", o.cfg.concurrency))
	}
	if o.cfg.duration <= 0 || o.cfg.callTimeout <= 0 {
		errs = append(errs, errors.New("-d and --timeout must be > 0"))
	}
	if !(o.cfg.cached >= 0 && o.cfg.cached <= 1) {
		errs = append(errs, fmt.Errorf("--cached must be in [0, 1], got %v", o.cfg.cached))
	}
	if mesh < 1 || mesh > 64 || o.cfg.modesPoints < 1 {
		errs = append(errs, errors.New("--grid must be 1…64 and --modes-points ≥ 1"))
	}
	return errs
}

// resolve converts raw into o.cfg (grid, cold kinds, models, dial
// options), returning every violation.
func (o *options) resolve(raw rawFlags) []error {
	var errs []error
	o.cfg.mesh3D = uint32(raw.mesh)
	for _, k := range strings.Split(raw.kinds, ",") {
		k = strings.TrimSpace(k)
		if !slices.Contains(coldKinds, k) {
			errs = append(errs, fmt.Errorf("--cold-kinds: %q is not one of %s", k, strings.Join(coldKinds, ", ")))
			continue
		}
		o.cfg.coldKinds = append(o.cfg.coldKinds, k)
	}
	for _, name := range strings.Split(raw.models, ",") {
		c, err := examples.Load(strings.TrimSpace(name))
		if err != nil {
			errs = append(errs, err)
			continue
		}
		o.cfg.models = append(o.cfg.models, namedModel{name: name, crystal: c})
	}
	o.cfg.dial = []client.Option{client.WithMaxAttempts(1), client.WithFailFast()}
	if raw.token != "" {
		o.cfg.dial = append(o.cfg.dial, client.WithToken(raw.token))
	}
	if raw.ca != "" {
		o.cfg.dial = append(o.cfg.dial, client.WithCAFile(raw.ca))
	}
	if (raw.cert == "") != (raw.key == "") {
		errs = append(errs, errors.New("--cert and --key go together"))
	} else if raw.cert != "" {
		o.cfg.dial = append(o.cfg.dial, client.WithClientCertificate(raw.cert, raw.key))
	}
	return errs
}

func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	o, err := parseFlags(args, stderr)
	if errors.Is(err, flag.ErrHelp) {
		return 0
	}
	if err != nil {
		fmt.Fprintf(stderr, "modegrid-load: %v\n", err)
		return 2
	}
	if o.adversarial {
		return runAdversarial(ctx, o, stdout, stderr)
	}
	rep, err := load(ctx, o)
	if err != nil {
		fmt.Fprintf(stderr, "modegrid-load: %v\n", err)
		return 1
	}
	if o.jsonOut {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		enc.Encode(rep)
	} else {
		printReport(stdout, rep)
	}
	return 0
}

// load performs the run o describes, starting and stopping the child
// modegridd when asked: start the target, run the callers while sampling
// memory (and sending SIGTERM part-way, if asked), then summarise the
// calls and what the server said about itself.
func load(ctx context.Context, o *options) (*report, error) {
	cfg := o.cfg
	var ch *child
	metricsURL := o.metrics
	if o.spawn != "" {
		var err error
		ch, err = startChild(ctx, o.spawn, strings.Fields(o.serverArgs), strings.Fields(o.serverEnv), 30*time.Second)
		if err != nil {
			return nil, err
		}
		defer ch.kill()
		cfg.target = ch.addr
		if ch.metricsAddr != "" {
			metricsURL = "http://" + ch.metricsAddr + "/metrics"
		}
	}
	c, err := dialEngine(cfg.target, cfg.dial...)
	if err != nil {
		return nil, err
	}
	defer c.Close()

	stop := make(chan struct{})
	cfg.stop = stop
	e := &engine{cfg: cfg, c: c}
	srv := &serverStats{Rejected: map[string]float64{}}
	var before map[string]float64

	mem := sampleMemory(ctx, ch, metricsURL)
	sg := startSigterm(ctx, o.sigtermAfter, ch, e, srv, stop)

	start := time.Now()
	// The warm-up happens inside run; "before" is scraped by the engine's
	// hook below once it is done, so both goroutine counts are taken with
	// the same single connection open and idle.
	e.afterWarm = func() {
		if metricsURL != "" {
			before, _ = scrape(ctx, metricsURL)
		}
		start = time.Now()
	}
	if err := e.run(ctx); err != nil {
		mem.stop()
		return nil, err
	}
	elapsed := time.Since(start)
	<-sg.done
	peakSampled := mem.stop()

	rep := summarizeRun(cfg, e.samples, elapsed)
	if sg.stats != nil {
		if err := sg.finish(e.samples, ch, srv); err != nil {
			return nil, err
		}
		rep.Sigterm = sg.stats
		rep.Server = srv
		return rep, nil
	}
	if metricsURL != "" {
		readServerMetrics(ctx, metricsURL, before, srv)
		rep.Server = srv
	}
	switch {
	case ch != nil:
		rep.Server = srv
		if err := finishChild(ch, srv); err != nil {
			return nil, err
		}
	case metricsURL != "":
		srv.PeakRSSBytes = peakSampled
		srv.RSSSource = "largest process_resident_memory_bytes sampled every 100 ms"
	}
	return rep, nil
}

// memorySampler samples the server's resident memory every 100 ms while
// a run lasts, keeping the largest value.
type memorySampler struct {
	cancel context.CancelFunc
	wg     sync.WaitGroup
	peak   uint64 // written by the sampling goroutine until stop
}

// sampleMemory starts sampling the child's VmRSS, or else
// process_resident_memory_bytes at metricsURL, or else nothing (peak 0).
func sampleMemory(ctx context.Context, ch *child, metricsURL string) *memorySampler {
	sctx, cancel := context.WithCancel(ctx)
	m := &memorySampler{cancel: cancel}
	m.wg.Add(1)
	go func() {
		defer m.wg.Done()
		tick := time.NewTicker(100 * time.Millisecond)
		defer tick.Stop()
		for {
			var v uint64
			switch {
			case ch != nil:
				v, _ = ch.rss()
			case metricsURL != "":
				met, err := scrape(sctx, metricsURL)
				if err == nil {
					v = uint64(met["process_resident_memory_bytes"])
				}
			}
			m.peak = max(m.peak, v)
			select {
			case <-tick.C:
			case <-sctx.Done():
				return
			}
		}
	}()
	return m
}

// stop ends the sampling and returns the largest value sampled.
func (m *memorySampler) stop() uint64 {
	m.cancel()
	m.wg.Wait()
	return m.peak
}

// sigterm is the SIGTERM fault of a run: its outcome is valid once done
// is closed (stats nil: no signal was sent).
type sigterm struct {
	done      chan struct{}
	stats     *sigtermStats
	signalled time.Time
}

// startSigterm, for after > 0, sends the child SIGTERM after that long,
// at a moment every caller has a call in flight (waiting at most 10 s for
// one), records the child's peak RSS just before in srv, and closes stop
// so that no call starts afterwards. For after == 0 it does nothing.
func startSigterm(ctx context.Context, after time.Duration, ch *child, e *engine, srv *serverStats, stop chan struct{}) *sigterm {
	sg := &sigterm{done: make(chan struct{})}
	if after <= 0 {
		close(sg.done)
		return sg
	}
	go func() {
		defer close(sg.done)
		t := time.NewTimer(after)
		defer t.Stop()
		select {
		case <-t.C:
		case <-ctx.Done():
			return
		}
		srv.PeakRSSBytes, _ = ch.peakRSS()
		n, at := e.haltWhenFull(e.cfg.concurrency, 10*time.Second, func() { ch.terminate() })
		sg.stats = &sigtermStats{InFlight: n, Codes: map[string]int{}}
		sg.signalled = at
		close(stop)
	}()
	return sg
}

// finish counts how the calls on the wire at the signal ended (and those
// not yet on it as it went out), waits for the child to exit and records
// its exit in sg.stats and srv.
func (sg *sigterm) finish(samples []sample, ch *child, srv *serverStats) error {
	sig := sg.stats
	for _, s := range samples {
		end := s.start.Add(s.latency)
		if end.Before(sg.signalled) {
			continue // finished before the signal
		}
		if s.sent.IsZero() || !s.sent.Before(sg.signalled) {
			sig.StartedAfter++ // not on the wire when the signal went out
			continue
		}
		sig.MaxAfterSignalMs = max(sig.MaxAfterSignalMs, float64(end.Sub(sg.signalled).Microseconds())/1000)
		switch {
		case s.code.String() != "OK":
			sig.Codes[s.code.String()]++
		case s.bad != "":
			sig.Incomplete++
		default:
			sig.Codes["OK"]++
		}
	}
	code, err := ch.wait(time.Minute)
	if err != nil {
		return err
	}
	sig.ExitCode = code
	sig.ExitAfterMs = float64(time.Since(sg.signalled).Microseconds()) / 1000
	srv.ExitCode = code
	srv.RSSSource = "VmHWM of the child before SIGTERM"
	return nil
}

// summarizeRun is the report of the calls made, all and by class.
func summarizeRun(cfg config, samples []sample, elapsed time.Duration) *report {
	rep := &report{Target: cfg.target, Concurrency: cfg.concurrency, DurationS: elapsed.Seconds(), CachedFraction: cfg.cached}
	var cached, cold []sample
	for _, s := range samples {
		if s.class == classCached {
			cached = append(cached, s)
		} else {
			cold = append(cold, s)
		}
	}
	rep.All, rep.Cached, rep.Cold = summarize(samples), summarize(cached), summarize(cold)
	rep.Calls = rep.All.Calls
	rep.ThroughputPerS = float64(rep.Calls) / elapsed.Seconds()
	return rep
}

// readServerMetrics records in srv the goroutines before the run and,
// once settled, after it, and the cache and rejection counters.
func readServerMetrics(ctx context.Context, metricsURL string, before map[string]float64, srv *serverStats) {
	after := scrapeSettled(ctx, metricsURL, before["go_goroutines"])
	srv.GoroutinesBefore, srv.GoroutinesAfter = before["go_goroutines"], after["go_goroutines"]
	srv.CacheMaxBytes = after["modegrid_cache_max_bytes"]
	srv.CacheBytes = sum(after, "modegrid_cache_bytes")
	srv.CacheEvictions = sum(after, "modegrid_cache_evictions_total")
	for _, r := range []string{"queue_full", "wait_timeout"} {
		srv.Rejected[r] = after[`modegrid_computations_rejected_total{reason="`+r+`"}`]
	}
}

// finishChild records the child's peak RSS in srv, stops it with SIGTERM
// and records its exit code.
func finishChild(ch *child, srv *serverStats) error {
	var err error
	srv.PeakRSSBytes, err = ch.peakRSS()
	if err != nil {
		return err
	}
	srv.RSSSource = "VmHWM of the child"
	ch.terminate()
	code, err := ch.wait(time.Minute)
	if err != nil {
		return err
	}
	srv.ExitCode = code
	return nil
}

// scrapeSettled scrapes url until go_goroutines is back to want (at most
// 3 s: the server's goroutines of finished calls exit asynchronously).
func scrapeSettled(ctx context.Context, url string, want float64) map[string]float64 {
	var m map[string]float64
	waitUntil(3*time.Second, 20*time.Millisecond, func() bool {
		var err error
		m, err = scrape(ctx, url)
		return err == nil && m["go_goroutines"] <= want
	})
	return m
}

// waitUntil checks cond every period until it holds or limit has passed.
func waitUntil(limit, period time.Duration, cond func() bool) bool {
	end := time.NewTimer(limit)
	defer end.Stop()
	tick := time.NewTicker(period)
	defer tick.Stop()
	for !cond() {
		select {
		case <-tick.C:
		case <-end.C:
			return cond()
		}
	}
	return true
}

func printReport(w io.Writer, r *report) {
	fmt.Fprintf(w, "modegrid-load: %s, %d callers for %.1f s, %.0f%% cached\n\n", r.Target, r.Concurrency, r.DurationS, 100*r.CachedFraction)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "class\tcalls\tok\tp50 ms\tp90 ms\tp99 ms\tmax ms\terrors\t")
	for _, c := range []struct {
		name string
		s    stats
	}{{"cached", r.Cached}, {"cold", r.Cold}, {"all", r.All}} {
		fmt.Fprintf(tw, "%s\t%d\t%d\t%.2f\t%.2f\t%.2f\t%.2f\t%s\t\n", c.name, c.s.Calls, c.s.OK, c.s.P50Ms, c.s.P90Ms, c.s.P99Ms, c.s.MaxMs, codeList(c.s.Codes, c.s.Incomplete))
	}
	tw.Flush()
	fmt.Fprintf(w, "\nthroughput %.0f calls/s\n", r.ThroughputPerS)
	if s := r.Server; s != nil {
		fmt.Fprintf(w, "server: peak RSS %.1f MiB (%s)", float64(s.PeakRSSBytes)/(1<<20), s.RSSSource)
		if s.CacheMaxBytes > 0 {
			fmt.Fprintf(w, "; cache %.1f of %.1f MiB, %.0f evictions; refused: %.0f queue full, %.0f wait timeout; goroutines %.0f before, %.0f after",
				s.CacheBytes/(1<<20), s.CacheMaxBytes/(1<<20), s.CacheEvictions, s.Rejected["queue_full"], s.Rejected["wait_timeout"], s.GoroutinesBefore, s.GoroutinesAfter)
		}
		fmt.Fprintf(w, "; exit code %d\n", s.ExitCode)
	}
	if s := r.Sigterm; s != nil {
		fmt.Fprintf(w, "SIGTERM with %d calls in flight: %s; the last ended %.0f ms after the signal; modegridd exited %d after %.0f ms (%d calls not yet on the wire then)\n",
			s.InFlight, codeList(s.Codes, s.Incomplete), s.MaxAfterSignalMs, s.ExitCode, s.ExitAfterMs, s.StartedAfter)
	}
}

// codeList prints counts by code, "none" when empty.
func codeList(codes map[string]int, incomplete int) string {
	var keys []string
	for k := range codes {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	var parts []string
	for _, k := range keys {
		parts = append(parts, fmt.Sprintf("%s %d", k, codes[k]))
	}
	if incomplete > 0 {
		parts = append(parts, fmt.Sprintf("incomplete %d", incomplete))
	}
	if len(parts) == 0 {
		return "none"
	}
	return strings.Join(parts, ", ")
}

package main

// The load engine: a fixed number of workers, each with one call in flight
// at a time, drawing cached or cold requests until the run ends.

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sync"
	"sync/atomic"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	grpcstats "google.golang.org/grpc/stats"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// config is one load run.
type config struct {
	target      string
	concurrency int           // workers, each with one call in flight
	duration    time.Duration // how long workers start new calls
	cached      float64       // fraction of calls drawn from the warm set
	models      []namedModel
	mesh3D      uint32        // grid divisions per direction for 3D DOS/thermal (2D: 2.5×, 1D: 20×)
	modesPoints int           // q-points of a cold modes call
	coldKinds   []string      // kinds of cold calls drawn from (nil: coldKinds)
	callTimeout time.Duration // deadline of each call
	seed        uint64
	dial        []client.Option

	// stop, when closed, ends the starting of new calls before duration
	// (the SIGTERM fault).
	stop <-chan struct{}
}

// namedModel is a model with the name it is reported under.
type namedModel struct {
	name    string
	crystal *modegridv1.Crystal
}

// Classes of calls.
const (
	classCached = "cached" // a request of the warm set: answered from the server's cache
	classCold   = "cold"   // a request never sent before: the server computes
)

// sample is one finished call.
type sample struct {
	class   string
	kind    string
	start   time.Time
	latency time.Duration
	sent    time.Time // when the call's request went on the wire (zero: never)
	code    codes.Code
	bad     string // an OK response that is incomplete: what is missing
}

// engine runs a load.
type engine struct {
	cfg  config
	c    *client.Client
	warm []request
	cold atomic.Uint64 // counter making every cold request unique

	flightMu sync.Mutex // protects inFlight and halted, so a signal sees an exact count
	inFlight int        // calls on the wire: sent (see wireMarker) and not yet ended
	halted   bool       // no call starts any more (haltWhenFull)

	// afterWarm, if set, runs once the warm set has been made, before the
	// measured part of the run.
	afterWarm func()

	mu      sync.Mutex // protects samples
	samples []sample
}

// request is one call to make: its kind and how to make it.
type request struct {
	kind string
	call func(ctx context.Context, c *client.Client) (bad string, err error)
}

// dims is the dimensionality of a model.
func dims(c *modegridv1.Crystal) int { return len(c.GetLattice()) }

// mesh returns the grid of a d-dimensional model for base divisions n3
// (per direction in 3D; more per direction in fewer dimensions, so every
// grid has a similar number of points).
func mesh(d int, n3 uint32) []uint32 {
	per := map[int]uint32{1: 20 * n3, 2: n3 * 5 / 2, 3: n3}[d]
	out := make([]uint32, d)
	for i := range out {
		out[i] = max(per, 1)
	}
	return out
}

// path runs from Γ to (q1, q1/2, 0) (components past d left 0).
func path(d int, q1 float64) []*modegridv1.PathPoint {
	end := &modegridv1.QPoint{Q1: q1}
	if d >= 2 {
		end.Q2 = q1 / 2
	}
	return []*modegridv1.PathPoint{{Label: "G", Q: &modegridv1.QPoint{}}, {Label: "E", Q: end}}
}

func modesBad(total int, got int) string {
	if got != total {
		return fmt.Sprintf("modes stream ended after %d of %d points", got, total)
	}
	return ""
}

// warmSet is the cached part of the mix: for every model a check, a
// dispersion, a DOS and a thermal request, made once before the run.
func warmSet(cfg config) []request {
	var out []request
	for _, m := range cfg.models {
		src := client.Inline(m.crystal)
		d := dims(m.crystal)
		g := client.Grid(mesh(d, cfg.mesh3D)...)
		out = append(out,
			request{"check", func(ctx context.Context, c *client.Client) (string, error) {
				r, err := c.Check(ctx, &modegridv1.CheckModelRequest{Model: src})
				if err == nil && !r.GetValid() {
					return "", fmt.Errorf("model %s is invalid: %v", m.name, r.GetViolations())
				}
				return "", err
			}},
			request{"dispersion", func(ctx context.Context, c *client.Client) (string, error) {
				r, err := c.Dispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: src, Path: path(d, 0.5), Points: 101})
				if err == nil && len(r.GetSamples()) < 101 {
					return fmt.Sprintf("dispersion of %d samples, asked 101", len(r.GetSamples())), nil
				}
				return "", err
			}},
			request{"dos", func(ctx context.Context, c *client.Client) (string, error) {
				r, err := c.DOS(ctx, &modegridv1.ComputeDosRequest{Model: src, Qpoints: g})
				return dosBad(r), err
			}},
			request{"thermal", func(ctx context.Context, c *client.Client) (string, error) {
				r, err := c.Thermal(ctx, &modegridv1.ComputeThermalRequest{Model: src, Qpoints: g, TemperaturesK: []float64{300}, AllowUnstable: true})
				return thermalBad(r, 1), err
			}},
		)
	}
	return out
}

func dosBad(r *modegridv1.ComputeDosResponse) string {
	if r == nil {
		return ""
	}
	if n := len(r.GetFrequencies()); n == 0 || len(r.GetDos()) != n || len(r.GetIntegrated()) != n {
		return fmt.Sprintf("DOS of %d frequencies, %d values, %d integrated", n, len(r.GetDos()), len(r.GetIntegrated()))
	}
	return ""
}

func thermalBad(r *modegridv1.ComputeThermalResponse, temps int) string {
	if r != nil && len(r.GetPoints()) != temps {
		return fmt.Sprintf("thermal response of %d points, asked %d", len(r.GetPoints()), temps)
	}
	return ""
}

// coldKinds are the kinds of cold calls.
var coldKinds = []string{"modes", "dispersion", "dos", "thermal"}

// coldGrid is the n-th of 1024 grids near the base grid of a
// d-dimensional model: divisions base+0…7 along each direction, shifted or
// not, so that cold DOS requests diagonalise a grid not yet cached.
func coldGrid(d int, n3 uint32, n uint64) *modegridv1.MonkhorstPackGrid {
	g := &modegridv1.MonkhorstPackGrid{Mesh: mesh(d, n3), Shifted: (n/512)%2 == 1}
	for k := range g.Mesh {
		g.Mesh[k] += uint32(n>>(3*k)) % 8
	}
	if d == 1 {
		g.Mesh[0] += uint32(n>>3) % 64 * 8 // 1D: 512 divisions counts
	}
	return g
}

// coldRequest makes a request the server has not seen: a modes stream on
// random q-points, a dispersion along a path whose end carries the unique
// number n, a DOS on a grid not yet cached (coldGrid), or a thermal request
// at a new temperature (on a cached grid, so only the sums are new).
func coldRequest(cfg config, rng *rand.Rand, n uint64) request {
	m := cfg.models[rng.IntN(len(cfg.models))]
	src := client.Inline(m.crystal)
	d := dims(m.crystal)
	u := float64(n%1_000_000_000) * 1e-10 // unique, and far below the physics
	kinds := cfg.coldKinds
	if len(kinds) == 0 {
		kinds = coldKinds
	}
	switch kinds[rng.IntN(len(kinds))] {
	case "modes":
		pts := make([][3]float64, cfg.modesPoints)
		for i := range pts {
			for k := range d {
				pts[i][k] = rng.Float64() - 0.5
			}
		}
		return request{"modes", func(ctx context.Context, c *client.Client) (string, error) {
			got, total := 0, 0
			err := c.StreamModes(ctx, &modegridv1.ComputeModesRequest{Model: src, Qpoints: client.QList(pts...)}, func(r *modegridv1.ComputeModesResponse) error {
				got += len(r.GetPoints())
				total = int(r.GetTotal())
				return nil
			})
			if err != nil {
				return "", err
			}
			if total != len(pts) {
				return fmt.Sprintf("modes stream total %d, asked %d", total, len(pts)), nil
			}
			return modesBad(total, got), nil
		}}
	case "dispersion":
		return request{"dispersion", func(ctx context.Context, c *client.Client) (string, error) {
			r, err := c.Dispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: src, Path: path(d, 0.25+u), Points: 101})
			if err == nil && len(r.GetSamples()) < 101 {
				return fmt.Sprintf("dispersion of %d samples, asked 101", len(r.GetSamples())), nil
			}
			return "", err
		}}
	case "dos":
		g := &modegridv1.QPointSet{Set: &modegridv1.QPointSet_Grid{Grid: coldGrid(d, cfg.mesh3D, n)}}
		return request{"dos", func(ctx context.Context, c *client.Client) (string, error) {
			r, err := c.DOS(ctx, &modegridv1.ComputeDosRequest{Model: src, Qpoints: g})
			return dosBad(r), err
		}}
	default:
		return request{"thermal", func(ctx context.Context, c *client.Client) (string, error) {
			r, err := c.Thermal(ctx, &modegridv1.ComputeThermalRequest{Model: src, Qpoints: client.Grid(mesh(d, cfg.mesh3D)...),
				TemperaturesK: []float64{300 + u*1e6}, AllowUnstable: true})
			return thermalBad(r, 1), err
		}}
	}
}

// run performs the load. The warm set is made once first (not measured);
// then cfg.concurrency workers make calls until cfg.duration has passed or
// cfg.stop is closed, and the run waits for the calls in flight.
func (e *engine) run(ctx context.Context) error {
	cfg := e.cfg
	e.warm = warmSet(cfg)
	for _, r := range e.warm {
		wctx, cancel := context.WithTimeout(ctx, cfg.callTimeout)
		bad, err := r.call(wctx, e.c)
		cancel()
		if err != nil {
			return fmt.Errorf("warming the cache (%s): %w", r.kind, err)
		}
		if bad != "" {
			return fmt.Errorf("warming the cache (%s): %s", r.kind, bad)
		}
	}
	if e.afterWarm != nil {
		e.afterWarm()
	}
	end := time.NewTimer(cfg.duration)
	defer end.Stop()
	stopping := make(chan struct{})
	var once sync.Once
	stopAll := func() { once.Do(func() { close(stopping) }) }
	go func() {
		select {
		case <-end.C:
		case <-cfg.stop:
		case <-ctx.Done():
		}
		stopAll()
	}()
	var wg sync.WaitGroup
	for w := range cfg.concurrency {
		wg.Add(1)
		go func() {
			defer wg.Done()
			rng := rand.New(rand.NewPCG(cfg.seed, uint64(w)))
			for {
				select {
				case <-stopping:
					return
				default:
				}
				var r request
				class := classCached
				if rng.Float64() < cfg.cached {
					r = e.warm[rng.IntN(len(e.warm))]
				} else {
					class = classCold
					r = coldRequest(cfg, rng, e.cold.Add(1))
				}
				if !e.do(ctx, class, r) {
					return
				}
			}
		}()
	}
	wg.Wait()
	stopAll()
	return nil
}

// do makes one call and records it; false (and no call) once halted.
func (e *engine) do(ctx context.Context, class string, r request) bool {
	e.flightMu.Lock()
	halted := e.halted
	e.flightMu.Unlock()
	if halted {
		return false
	}
	f := &flight{e: e}
	cctx, cancel := context.WithTimeout(context.WithValue(ctx, flightKey{}, f), e.cfg.callTimeout)
	defer cancel()
	start := time.Now()
	bad, err := r.call(cctx, e.c)
	e.flightMu.Lock()
	if !f.sent.IsZero() {
		e.inFlight--
	}
	lat := time.Since(start)
	sent := f.sent
	e.flightMu.Unlock()
	code := status.Code(err)
	if err != nil && code == codes.Unknown {
		switch {
		case errors.Is(err, context.DeadlineExceeded):
			code = codes.DeadlineExceeded
		case errors.Is(err, context.Canceled):
			code = codes.Canceled
		}
	}
	e.mu.Lock()
	e.samples = append(e.samples, sample{class: class, kind: r.kind, start: start, latency: lat, sent: sent, code: code, bad: bad})
	e.mu.Unlock()
	return true
}

// flight is one call of the engine, carried in its context so that
// wireMarker can tell the engine when its request is on the wire.
type flight struct {
	e    *engine
	sent time.Time // guarded by e.flightMu
}

type flightKey struct{}

// wireMarker is a gRPC stats handler that counts a call of the engine in
// flight from the moment its first request's headers are queued on a
// connection that is not draining (grpc-go reports OutHeader then). A call
// counted so is one the server will receive even if it begins a graceful
// stop at once: the server's first GOAWAY is answered only after what the
// client queued before it. A call begun but not yet on the wire when the
// server stops is instead retried by gRPC on a new connection and refused
// there (UNAVAILABLE, connection refused) — it never reached the server, so
// it is not one of the calls a stop must finish.
type wireMarker struct{}

func (wireMarker) TagRPC(ctx context.Context, _ *grpcstats.RPCTagInfo) context.Context   { return ctx }
func (wireMarker) TagConn(ctx context.Context, _ *grpcstats.ConnTagInfo) context.Context { return ctx }
func (wireMarker) HandleConn(context.Context, grpcstats.ConnStats)                       {}

func (wireMarker) HandleRPC(ctx context.Context, s grpcstats.RPCStats) {
	if h, ok := s.(*grpcstats.OutHeader); !ok || !h.Client {
		return
	}
	f, ok := ctx.Value(flightKey{}).(*flight)
	if !ok {
		return
	}
	f.e.flightMu.Lock()
	if f.sent.IsZero() {
		f.sent = time.Now()
		f.e.inFlight++
	}
	f.e.flightMu.Unlock()
}

// dialEngine dials target for an engine: the client options given plus
// the stats handler that counts the engine's calls on the wire.
func dialEngine(target string, opts ...client.Option) (*client.Client, error) {
	return client.Dial(target, append(opts, client.WithDialOptions(grpc.WithStatsHandler(wireMarker{})))...)
}

// haltWhenFull waits (at most limit) until n calls are on the wire, then,
// with no call able to be sent or end meanwhile, runs act, stops calls from
// starting and returns the number on the wire and the time act ran. Calls
// sent before that time and ended after it are exactly the ones on the
// wire when act ran.
func (e *engine) haltWhenFull(n int, limit time.Duration, act func()) (int, time.Time) {
	deadline := time.Now().Add(limit)
	tick := time.NewTicker(time.Millisecond)
	defer tick.Stop()
	for {
		e.flightMu.Lock()
		if e.inFlight >= n || time.Now().After(deadline) {
			at := time.Now()
			act()
			e.halted = true
			k := e.inFlight
			e.flightMu.Unlock()
			return k, at
		}
		e.flightMu.Unlock()
		<-tick.C
	}
}

// stats are the figures of a set of calls.
type stats struct {
	Calls      int            `json:"calls"`
	OK         int            `json:"ok"`
	Codes      map[string]int `json:"codes"` // every non-OK code
	Incomplete int            `json:"incomplete"`
	P50Ms      float64        `json:"p50_ms"`
	P90Ms      float64        `json:"p90_ms"`
	P99Ms      float64        `json:"p99_ms"`
	MaxMs      float64        `json:"max_ms"`
}

// summarize computes the figures of ss.
func summarize(ss []sample) stats {
	st := stats{Codes: map[string]int{}}
	lat := make([]time.Duration, 0, len(ss))
	for _, s := range ss {
		st.Calls++
		switch {
		case s.code != codes.OK:
			st.Codes[s.code.String()]++
		case s.bad != "":
			st.Incomplete++
		default:
			st.OK++
		}
		lat = append(lat, s.latency)
	}
	slices.Sort(lat)
	q := func(p float64) float64 {
		if len(lat) == 0 {
			return 0
		}
		i := int(math.Ceil(p*float64(len(lat)))) - 1 // nearest-rank percentile (common practice)
		return float64(lat[max(i, 0)].Microseconds()) / 1000
	}
	st.P50Ms, st.P90Ms, st.P99Ms, st.MaxMs = q(0.50), q(0.90), q(0.99), q(1)
	return st
}

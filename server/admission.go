package server

// Admission by estimated cost. Before any work every RPC estimates the
// peak memory and the work of its computation from the request (the
// estimators of physics/cost.go, physics/spectra/cost.go and
// physics/thermo/cost.go) and
//
//   - refuses with INVALID_ARGUMENT, naming the field to change, what
//     could never fit this server: an estimate over the whole memory
//     budget, or over the compute-time bound (--max-compute-seconds);
//   - reserves its estimate from one server-wide memory budget
//     (--memory-budget) for as long as it computes, waiting for it at most
//     --queue-timeout like a computation slot, and refuses with
//     RESOURCE_EXHAUSTED when the budget stays busy.
//
// The slot gate (server/gate) still bounds how many computations run at
// once; the budget bounds how much memory they take together.

import (
	"context"
	"errors"
	"fmt"
	"os"
	"runtime"
	"runtime/debug"
	"strconv"
	"strings"
	"sync/atomic"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"golang.org/x/sync/semaphore"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/types/known/durationpb"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/polar"
	"github.com/materials-lab/modegrid/physics/spectra"
	"github.com/materials-lab/modegrid/physics/thermo"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// Admission defaults.
const (
	// RuntimeReserve is the memory kept out of the budget for everything
	// not estimated: the Go runtime, goroutine stacks, gRPC buffers,
	// compiled models, the collector's headroom.
	RuntimeReserve = 256 << 20
	// FallbackMemoryLimit is assumed when neither the container nor
	// GOMEMLIMIT nor /proc/meminfo tells the memory available.
	FallbackMemoryLimit = 4 << 30
	// MinMemoryBudget is the smallest derived budget.
	MinMemoryBudget = 64 << 20
	// MaxReductionCacheBytes bounds the grid reductions and simplex
	// classes the server keeps for reuse (mesh.ReductionCache): a
	// quarter of the result cache's bound, at most this. The bound is
	// taken out of the memory budget.
	MaxReductionCacheBytes = 64 << 20
	// DefaultMaxComputeSeconds bounds the estimated compute time of one
	// request (estimated work at physics.FlopsPerCoreSecond on every core).
	DefaultMaxComputeSeconds = 300
)

// Refusal reasons of admission (label values of
// modegrid_admission_refused_total).
const (
	reasonMemoryNeverFits = "memory_never_fits"
	reasonWorkTooLong     = "work_too_long"
	reasonReplyTooLarge   = "reply_too_large"
	reasonMemoryBusy      = "memory_busy"
	reasonCompileTooLong  = "compile_too_long"
)

// memoryLimit is the memory the process may use and where that figure
// came from: the smallest of the cgroup v2 memory.max, the cgroup v1
// memory.limit_in_bytes and GOMEMLIMIT that is set; otherwise the
// machine's MemTotal; otherwise FallbackMemoryLimit.
func memoryLimit() (int64, string) {
	limit, from := int64(0), ""
	consider := func(v int64, src string) {
		if v > 0 && (limit == 0 || v < limit) {
			limit, from = v, src
		}
	}
	consider(readLimitFile("/sys/fs/cgroup/memory.max"), "cgroup v2 memory.max")
	// cgroup v1 reports "no limit" as a huge number (about 2⁶³ rounded to
	// pages): anything above 2⁶⁰ is taken as unset.
	if v := readLimitFile("/sys/fs/cgroup/memory/memory.limit_in_bytes"); v < 1<<60 {
		consider(v, "cgroup v1 memory.limit_in_bytes")
	}
	if v := debug.SetMemoryLimit(-1); v < (1<<63 - 1) {
		consider(v, "GOMEMLIMIT")
	}
	if limit > 0 {
		return limit, from
	}
	if v := memTotal(); v > 0 {
		return v, "/proc/meminfo MemTotal"
	}
	return FallbackMemoryLimit, "fallback"
}

// readLimitFile reads a byte count ("max" or unreadable: 0).
func readLimitFile(path string) int64 {
	b, err := os.ReadFile(path)
	if err != nil {
		return 0
	}
	v, err := strconv.ParseInt(strings.TrimSpace(string(b)), 10, 64)
	if err != nil {
		return 0
	}
	return v
}

// memTotal is MemTotal of /proc/meminfo in bytes (0 if unknown).
func memTotal() int64 {
	b, err := os.ReadFile("/proc/meminfo")
	if err != nil {
		return 0
	}
	for _, line := range strings.Split(string(b), "\n") {
		if f := strings.Fields(line); len(f) >= 2 && f[0] == "MemTotal:" {
			kb, err := strconv.ParseInt(f[1], 10, 64)
			if err == nil {
				return kb << 10
			}
		}
	}
	return 0
}

// DerivedMemoryBudget is the default memory budget: the memory limit (see
// memoryLimit) minus the result cache's bound, the reduction cache's bound
// and RuntimeReserve, and never below MinMemoryBudget.
func DerivedMemoryBudget(cacheBytes, reductionBytes int64) (int64, string) {
	limit, from := memoryLimit()
	b := limit - max(0, cacheBytes) - max(0, reductionBytes) - RuntimeReserve
	return max(b, MinMemoryBudget), fmt.Sprintf("%s %s − cache %s − reductions %s − reserve %s",
		from, fmtBytes(limit), fmtBytes(max(0, cacheBytes)), fmtBytes(reductionBytes), fmtBytes(RuntimeReserve))
}

// fmtBytes prints a byte count with a binary unit.
func fmtBytes(b int64) string {
	switch {
	case b >= 1<<30:
		return fmt.Sprintf("%.2f GiB", float64(b)/(1<<30))
	case b >= 1<<20:
		return fmt.Sprintf("%.1f MiB", float64(b)/(1<<20))
	case b >= 1<<10:
		return fmt.Sprintf("%.1f KiB", float64(b)/(1<<10))
	}
	return fmt.Sprintf("%d B", b)
}

// budget is the server-wide memory budget shared by every computation.
type budget struct {
	sem      *semaphore.Weighted
	total    int64
	inUse    atomic.Int64
	wait     time.Duration // longest wait for memory (the queue timeout)
	maxSecs  float64       // compute-time bound
	cores    int
	refused  *prometheus.CounterVec
	describe string // how total was derived
}

func newBudget(cfg Config, reg prometheus.Registerer) *budget {
	total, how := cfg.MemoryBudget, "--memory-budget"
	if total <= 0 {
		total, how = DerivedMemoryBudget(cfg.cacheBytes(), cfg.reductionBytes())
	}
	b := &budget{sem: semaphore.NewWeighted(total), total: total, wait: cfg.QueueTimeout,
		maxSecs: cfg.MaxComputeSeconds, cores: runtime.GOMAXPROCS(0), describe: how}
	b.refused = prometheus.NewCounterVec(prometheus.CounterOpts{
		Namespace: "modegrid", Name: "admission_refused_total",
		Help: "Requests refused by estimated cost before any work, by reason (memory_never_fits, work_too_long, reply_too_large, memory_busy, compile_too_long).",
	}, []string{"reason"})
	for _, r := range []string{reasonMemoryNeverFits, reasonWorkTooLong, reasonReplyTooLarge, reasonMemoryBusy, reasonCompileTooLong} {
		b.refused.WithLabelValues(r)
	}
	reg.MustRegister(b.refused,
		prometheus.NewGaugeFunc(prometheus.GaugeOpts{Namespace: "modegrid", Name: "memory_budget_bytes",
			Help: "The server-wide memory budget of computations, bytes."}, func() float64 { return float64(b.total) }),
		prometheus.NewGaugeFunc(prometheus.GaugeOpts{Namespace: "modegrid", Name: "memory_budget_in_use_bytes",
			Help: "Memory reserved from the budget by running computations, bytes (their estimates)."}, func() float64 { return float64(b.inUse.Load()) }),
	)
	return b
}

// reductionBytes is the bound of the reduction cache: a quarter of the
// result cache's, at most MaxReductionCacheBytes.
func (c Config) reductionBytes() int64 {
	return min(c.cacheBytes()/4, MaxReductionCacheBytes)
}

// estimate is a request's estimated cost and what the client can change.
type estimate struct {
	cost   physics.Cost
	field  string // the request field to change
	change string // what to change, in words ("a smaller grid", …)
	// lower marks a lower bound computed from the request before its
	// model is compiled (precompile.go): the refusal says "at least".
	lower bool
}

// check adds to vs what makes the request impossible on this server: an
// estimate over the whole budget or over the compute-time bound.
func (b *budget) check(vs *violations, e estimate) {
	if reason, msg := b.verdict(e); reason != "" {
		b.refused.WithLabelValues(reason).Inc()
		vs.Add(e.field, "%s", msg)
	}
}

// verdict says why e could never be admitted ("" when it could).
func (b *budget) verdict(e estimate) (reason, msg string) {
	atLeast := ""
	if e.lower {
		atLeast = "at least "
	}
	if e.cost.Bytes > b.total {
		return reasonMemoryNeverFits, fmt.Sprintf("estimated peak memory %s%s exceeds this server's memory budget %s (memory-budget); ask for %s",
			atLeast, fmtBytes(e.cost.Bytes), fmtBytes(b.total), e.change)
	}
	if secs := e.cost.Seconds(b.cores); secs > b.maxSecs {
		return reasonWorkTooLong, fmt.Sprintf("estimated work %s%.3g floating-point operations, about %.0f s on %d cores, exceeds this server's bound max-compute-seconds=%g; ask for %s",
			atLeast, e.cost.Flops, secs, b.cores, b.maxSecs, e.change)
	}
	return "", ""
}

// checkReply adds a violation when one message of the reply cannot be
// under the message cap.
func (s *Service) checkReply(vs *violations, field string, bytes float64, what string) {
	if bytes > float64(s.cfg.MaxMsgBytes) {
		s.budget.refused.WithLabelValues(reasonReplyTooLarge).Inc()
	}
	s.checkResponseSize(vs, field, bytes, what)
}

// errBudgetBusy is the refusal of a request whose estimate fits the budget
// but not what is free of it within the wait.
type errBudgetBusy struct {
	need, total, inUse int64
	wait               time.Duration
}

func (e *errBudgetBusy) Error() string {
	return fmt.Sprintf("server busy: estimated peak memory %s does not fit what is free of the memory budget %s (%s in use) within %v (queue-timeout); retry later",
		fmtBytes(e.need), fmtBytes(e.total), fmtBytes(e.inUse), e.wait)
}

func (e *errBudgetBusy) status() error {
	st := status.New(codes.ResourceExhausted, e.Error())
	if d, err := st.WithDetails(
		&errdetails.QuotaFailure{Violations: []*errdetails.QuotaFailure_Violation{{Subject: "memory-budget", Description: e.Error()}}},
		&errdetails.RetryInfo{RetryDelay: durationpb.New(time.Second)},
	); err == nil {
		st = d
	}
	return st.Err()
}

// reserve takes bytes from the budget for one computation, waiting at
// most the queue timeout (or until ctx ends); release returns them.
func (b *budget) reserve(ctx context.Context, bytes int64) (release func(), err error) {
	bytes = min(max(bytes, 1), b.total)
	if !b.sem.TryAcquire(bytes) {
		wctx := ctx
		if b.wait > 0 {
			var cancel context.CancelFunc
			wctx, cancel = context.WithTimeout(ctx, b.wait)
			defer cancel()
		}
		if err := b.sem.Acquire(wctx, bytes); err != nil {
			if ctx.Err() != nil {
				return nil, ctx.Err()
			}
			b.refused.WithLabelValues(reasonMemoryBusy).Inc()
			return nil, &errBudgetBusy{need: bytes, total: b.total, inUse: b.inUse.Load(), wait: b.wait}
		}
	}
	b.inUse.Add(bytes)
	var once atomic.Bool
	return func() {
		if once.CompareAndSwap(false, true) {
			b.inUse.Add(-bytes)
			b.sem.Release(bytes)
		}
	}, nil
}

// admitted runs fn holding e's memory from the budget.
func (s *Service) admitted(ctx context.Context, e estimate, fn func(ctx context.Context) error) error {
	release, err := s.budget.reserve(ctx, e.cost.Bytes)
	if err != nil {
		return err
	}
	defer release()
	return fn(ctx)
}

// busyStatus converts a budget refusal (nil if err is not one).
func busyStatus(err error) error {
	var b *errBudgetBusy
	if errors.As(err, &b) {
		return b.status()
	}
	return nil
}

// gridSize describes model e on spec for the estimators, with the exact
// irreducible count when it is cheap to know.
func (s *Service) gridSize(e *modelEntry, spec mesh.GridSpec) physics.GridSize {
	irr, _ := physics.IrreducibleCount(s.reductions, e.m, spec)
	return e.m.GridSizeOf(spec, irr)
}

// thermalEstimate is the cost of a thermal request: the grid's modes
// (with eigenvectors for mean-square displacements), the sums, and the
// reply twice.
func (s *Service) thermalEstimate(e *modelEntry, spec mesh.GridSpec, opt thermo.ThermalOptions) estimate {
	return thermalCost(s.gridSize(e, spec), opt)
}

// thermalCost is thermalEstimate for a model of size.
func thermalCost(size physics.GridSize, opt thermo.ThermalOptions) estimate {
	c := physics.GridModesCost(size, physics.GridOptions{Eigenvectors: opt.MSD})
	c = c.Plus(thermo.ThermalCost(size, len(opt.TempsK), opt.MSD, opt.Route, true))
	per := int64(100)
	if opt.MSD {
		per += int64(size.Sites) * 110
	}
	c.Bytes += 2 * per * int64(len(opt.TempsK))
	change := "a smaller grid (qpoints)"
	if opt.MSD {
		change = "a smaller grid (qpoints) or no mean-square displacements (msd)"
	}
	return estimate{cost: c, field: "qpoints", change: change}
}

// stabilityEstimate is the cost of CheckModel's search for imaginary
// modes: the frequencies on the coarse stability grid.
func (s *Service) stabilityEstimate(e *modelEntry, side int) estimate {
	spec := stabilitySpec(e.m.Dim(), side)
	return stabilityCost(s.gridSize(e, spec))
}

// stabilitySpec is the coarse stability grid of a dim-dimensional model.
func stabilitySpec(dim, side int) mesh.GridSpec {
	spec := mesh.GridSpec{Mesh: [3]int{side, side, side}}
	for k := dim; k < 3; k++ {
		spec.Mesh[k] = 1
	}
	return spec
}

// stabilityCost is stabilityEstimate for a model of size.
func stabilityCost(size physics.GridSize) estimate {
	c := physics.GridModesCost(size, physics.GridOptions{})
	c.Bytes += 64 << 10 // the summary and its encoding
	return estimate{cost: c, field: "model", change: "a model with fewer sites (or a server with a larger stability-mesh budget)"}
}

// typicalCosts estimates requests typical for model e on this server: a
// DOS on a 24-point-per-direction grid (total and per site), a thermal
// call of 100 temperatures on it (with and without mean-square
// displacements), a 100-point path and 1000 q-points of modes with
// eigenvectors.
func (s *Service) typicalCosts(e *modelEntry) []*modegridv1.RequestCost {
	const n = 24
	spec := mesh.GridSpec{Mesh: [3]int{n, n, n}}
	label := "24x24x24"
	switch e.m.Dim() {
	case 1:
		spec.Mesh = [3]int{n * n * n, 1, 1}
		label = "13824"
	case 2:
		spec.Mesh = [3]int{118, 118, 1}
		label = "118x118"
	}
	temps := make([]float64, 100)
	var out []*modegridv1.RequestCost
	add := func(what string, est estimate, fits bool) {
		reason, _ := s.budget.verdict(est)
		out = append(out, &modegridv1.RequestCost{Request: what, PeakBytes: uint64(max(0, est.cost.Bytes)),
			Seconds: est.cost.Seconds(s.budget.cores), Admitted: fits && reason == ""})
	}
	add("dos "+label+" tetrahedron", s.dosEstimate(e, spec, spectra.DOSOptions{}), true)
	add("dos "+label+" tetrahedron per-site", s.dosEstimate(e, spec, spectra.DOSOptions{PerSite: true}), true)
	add("thermal "+label+" 100 temperatures", s.thermalEstimate(e, spec, thermo.ThermalOptions{TempsK: temps}), true)
	add("thermal "+label+" 100 temperatures msd", s.thermalEstimate(e, spec, thermo.ThermalOptions{TempsK: temps, MSD: true}), true)
	size := e.m.GridSizeOf(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}, 1)
	add("dispersion 100 points", estimate{cost: physics.DispersionCost(size, 100, false, false)}, true)
	opt := physics.ModeOptions{Eigenvectors: true}
	est, per := s.modesCost(e, 1000, opt)
	add("modes 1000 q-points eigenvectors", est, per <= float64(s.cfg.MaxMsgBytes))
	if e.m.Polar() {
		add(fmt.Sprintf("infrared %d points", polar.DefaultIRPoints), estimate{cost: polar.InfraredCost(size, polar.DefaultIRPoints)}, true)
	}
	return out
}

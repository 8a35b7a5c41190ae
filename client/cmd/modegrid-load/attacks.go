package main

// The rows of the adversarial suite. Each request is one that took a
// replica down before admission by estimated cost, cancellable stages and
// panic containment, or a variant of one; the short form sends the cheap
// ones as they are and smaller variants of the expensive ones.

import (
	"context"
	"fmt"
	"math"
	"slices"
	"strings"
	"sync"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// attacks lists the suite's rows in the order they run: refusals of
// requests too large, two calls together over the memory budget, calls
// cut by their deadline, then cancellation, injected panics and a restart.
func attacks() []attack {
	return slices.Concat(refusalAttacks(), deadlineAttacks(), faultAttacks())
}

// refused is a row whose request must be refused with INVALID_ARGUMENT,
// cold (the server compiles the model first) and warm (the same request
// again, the model compiled and known by hash).
func refused(name string, fn func(ctx context.Context, c *client.Client) error) attack {
	return attack{name: name, kind: expectRefusal, want: codes.InvalidArgument, short: true, long: true,
		run: func(ctx context.Context, a *arena) (outcome, error) {
			var o, warm outcome
			call(&o, func() error { return fn(ctx, a.c) })
			call(&warm, func() error { return fn(ctx, a.c) })
			o.codes = append(o.codes, warm.codes...)
			o.warm = warm.elapsed
			return o, nil
		}}
}

// refusalAttacks are the rows of requests the server must refuse before
// computing, and of two calls that fit only one at a time.
func refusalAttacks() []attack {
	return []attack{
		refused("ComputeDos, 216 sites, 160³ grid, per-site DOS", func(ctx context.Context, c *client.Client) error {
			_, err := c.DOS(ctx, &modegridv1.ComputeDosRequest{Model: model(216, true), Qpoints: client.Grid(160, 160, 160), PerSite: true})
			return err
		}),
		{name: "2 × ComputeDos at once, 64 sites, 160³ grid, per-site DOS", kind: expectRefusal, want: codes.InvalidArgument, short: true, long: true,
			run: twoDOS64},
		refused("ComputeThermal, 64 sites, 24³ grid, mean-square displacements", func(ctx context.Context, c *client.Client) error {
			_, err := c.Thermal(ctx, &modegridv1.ComputeThermalRequest{Model: model(64, true), Qpoints: client.Grid(24, 24, 24), TemperaturesK: []float64{300}, Msd: true})
			return err
		}),
		refused("ComputeThermal, 8 sites, 64³ grid, mean-square displacements", func(ctx context.Context, c *client.Client) error {
			_, err := c.Thermal(ctx, &modegridv1.ComputeThermalRequest{Model: model(8, true), Qpoints: client.Grid(64, 64, 64), TemperaturesK: []float64{300}, Msd: true})
			return err
		}),
		refused("CheckModel, 512 sites (CPU bomb)", func(ctx context.Context, c *client.Client) error {
			_, err := c.Check(ctx, &modegridv1.CheckModelRequest{Model: model(512, true)})
			return err
		}),
		refused("ComputeModes, 512 sites, eigenvectors (one q-point's reply over the 16 MiB cap)", func(ctx context.Context, c *client.Client) error {
			_, err := c.Modes(ctx, &modegridv1.ComputeModesRequest{Model: model(512, true), Qpoints: client.QList([3]float64{0.1, 0.2, 0.3}), Eigenvectors: true})
			return err
		}),
		refused("ComputeDos, 64 sites, per-site, 8×10⁵ samples (reply 410 MB over the cap)", func(ctx context.Context, c *client.Client) error {
			_, err := c.DOS(ctx, &modegridv1.ComputeDosRequest{Model: model(64, true), Qpoints: client.Grid(4, 4, 4), PerSite: true,
				Min: 0, Max: 20, Step: 2.5e-5})
			return err
		}),
		{name: "2 × ComputeThermal at once, 8 sites, mean-square displacements, together over a 96 MiB budget", kind: expectRun,
			want: codes.OK, also: codes.ResourceExhausted, short: true, args: []string{"--memory-budget", "96MiB", "--queue-timeout", "2s"},
			run: twoFitting},
		{name: "2 × ComputeThermal at once, 8 sites, mean-square displacements, together over the budget", kind: expectRun,
			want: codes.OK, also: codes.ResourceExhausted, long: true, run: twoFitting},
	}
}

// deadlineAttacks are the rows of calls that run past their deadline.
func deadlineAttacks() []attack {
	return []attack{
		deadline("CheckModel, 64 sites, work bound lifted, 300 ms deadline (mid-diagonalisation)", true, false,
			[]string{"--max-compute-seconds", "1e9"}, 300*time.Millisecond, func(ctx context.Context, c *client.Client) error {
				_, err := c.Check(ctx, &modegridv1.CheckModelRequest{Model: model(64, true)})
				return err
			}),
		deadline("CheckModel, 512 sites, work bound lifted, 10 s deadline (CPU bomb, mid-diagonalisation)", false, true,
			[]string{"--max-compute-seconds", "1e9"}, 10*time.Second, func(ctx context.Context, c *client.Client) error {
				_, err := c.Check(ctx, &modegridv1.CheckModelRequest{Model: model(512, true)})
				return err
			}),
		deadline("CheckModel, 512 sites (CPU bomb), 200 ms deadline (mid-compile, before its refusal)", true, true,
			nil, 200*time.Millisecond, func(ctx context.Context, c *client.Client) error {
				_, err := c.Check(ctx, &modegridv1.CheckModelRequest{Model: model(512, true)})
				return err
			}),
		deadline("CheckModel, 512 sites of one mass (symmetry search), 200 ms deadline (mid-compile)", true, true,
			[]string{"--max-compute-seconds", "1e9"}, 200*time.Millisecond, func(ctx context.Context, c *client.Client) error {
				_, err := c.Check(ctx, &modegridv1.CheckModelRequest{Model: model(512, false)})
				return err
			}),
		deadline("CheckModel, 512 sites of one mass (symmetry search), 10 s deadline", false, true,
			[]string{"--max-compute-seconds", "1e9"}, 10*time.Second, func(ctx context.Context, c *client.Client) error {
				_, err := c.Check(ctx, &modegridv1.CheckModelRequest{Model: model(512, false)})
				return err
			}),
		deadline("ComputeDos, 64 sites, 16³ grid, per-site, 500 ms deadline (mid-diagonalisation)", true, true,
			nil, 500*time.Millisecond, func(ctx context.Context, c *client.Client) error {
				_, err := c.DOS(ctx, &modegridv1.ComputeDosRequest{Model: model(64, true), Qpoints: client.Grid(16, 16, 16), PerSite: true})
				return err
			}),
		deadline("ComputeThermal, 8 sites, 40³ grid, mean-square displacements, 300 ms deadline", true, true,
			nil, 300*time.Millisecond, func(ctx context.Context, c *client.Client) error {
				_, err := c.Thermal(ctx, &modegridv1.ComputeThermalRequest{Model: model(8, true), Qpoints: client.Grid(40, 40, 40),
					TemperaturesK: []float64{300}, Msd: true})
				return err
			}),
	}
}

// faultAttacks are the rows of a cancelled stream, panics injected in the
// engine and a restart under load.
func faultAttacks() []attack {
	return []attack{
		{name: "ComputeModes, 64 sites, 1000 q-points with eigenvectors, cancelled after the first message", kind: expectCancel,
			want: codes.Canceled, short: true, long: true, run: cancelStream},
		{name: "ComputeModes (stream), panic injected in an engine worker", kind: expectRun, want: codes.Internal, short: true, long: true,
			run: func(ctx context.Context, a *arena) (outcome, error) {
				var o outcome
				call(&o, func() error {
					_, err := a.c.Modes(faulty(ctx, "ComputeModes"), &modegridv1.ComputeModesRequest{Model: model(8, true), Qpoints: client.Grid(4, 4, 4)})
					return err
				})
				return o, nil
			}},
		{name: "ComputeDos (unary, shared cache flight), panic injected in an engine worker", kind: expectRun, want: codes.Internal, short: true, long: true,
			run: func(ctx context.Context, a *arena) (outcome, error) {
				var o outcome
				call(&o, func() error {
					_, err := a.c.DOS(faulty(ctx, "ComputeDos"), &modegridv1.ComputeDosRequest{Model: model(8, true), Qpoints: client.Grid(8, 8, 8)})
					return err
				})
				return o, nil
			}},
		{name: "restart under load: 6 callers, SIGTERM, a new server on the same port", kind: expectRun, want: codes.OK, short: true, long: true,
			run: restartUnderLoad},
	}
}

// deadline is a row whose call runs past its deadline d.
func deadline(name string, short, long bool, args []string, d time.Duration, fn func(ctx context.Context, c *client.Client) error) attack {
	return attack{name: name, kind: expectCancel, want: codes.DeadlineExceeded, short: short, long: long, args: args,
		run: func(ctx context.Context, a *arena) (outcome, error) {
			var o outcome
			withDeadline(ctx, &o, d, func(ctx context.Context) error { return fn(ctx, a.c) })
			return o, nil
		}}
}

// twoDOS64 sends two 64-site per-site DOS on 160³ at once.
func twoDOS64(ctx context.Context, a *arena) (outcome, error) {
	var o outcome
	var mu sync.Mutex
	var wg sync.WaitGroup
	start := time.Now()
	for i := range 2 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			var one outcome
			call(&one, func() error {
				_, err := a.c.DOS(ctx, &modegridv1.ComputeDosRequest{Model: model(64, true), Qpoints: client.Grid(160, 160, 160), PerSite: true,
					Unit: []modegridv1.FrequencyUnit{modegridv1.FrequencyUnit_FREQUENCY_UNIT_THZ, modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1}[i]})
				return err
			})
			mu.Lock()
			o.codes = append(o.codes, one.codes...)
			if o.msg != one.msg {
				o.msg = joinNonEmpty(o.msg, one.msg, "; ")
			}
			mu.Unlock()
		}()
	}
	wg.Wait()
	o.elapsed = time.Since(start)
	return o, nil
}

// twoFitting sends two mean-square-displacement thermal calls on grids
// whose estimates are each over half the server's budget (the first about
// 60 %), the second once the first holds its memory: the second must wait for the first (OK) or be
// refused RESOURCE_EXHAUSTED; the budget is never overrun.
func twoFitting(ctx context.Context, a *arena) (outcome, error) {
	var o outcome
	m8 := model(8, true)
	chk, err := a.c.Check(ctx, &modegridv1.CheckModelRequest{Model: m8})
	if err != nil {
		return o, fmt.Errorf("%w: CheckModel for the typical costs: %v", errUnexpected, err)
	}
	var e24 float64
	for _, tc := range chk.GetTypicalCosts() {
		if strings.HasPrefix(tc.GetRequest(), "thermal 24x24x24") && strings.HasSuffix(tc.GetRequest(), "msd") {
			e24 = float64(tc.GetPeakBytes())
		}
	}
	m, err := scrape(ctx, a.metrics)
	if err != nil || e24 == 0 {
		return o, fmt.Errorf("%w: no thermal msd estimate (%v) or metrics (%v)", errUnexpected, e24, err)
	}
	budget := m["modegrid_memory_budget_bytes"]
	n := uint32(24 * math.Cbrt(0.6*budget/e24))
	// Two grids, so that neither is answered from the other's cached
	// modes: each computes, and they cannot fit together.
	req := func(n uint32) *modegridv1.ComputeThermalRequest {
		return &modegridv1.ComputeThermalRequest{Model: m8, Qpoints: client.Grid(n, n, n), TemperaturesK: []float64{300}, Msd: true}
	}
	first := make(chan outcome, 1)
	start := time.Now()
	go func() {
		var one outcome
		call(&one, func() error { _, err := a.c.Thermal(ctx, req(n)); return err })
		first <- one
	}()
	// The second goes once the first holds its memory (or has finished).
	var done *outcome
	held := 0.0 // the first's reservation, once seen
	for done == nil {
		if m, err := scrape(ctx, a.metrics); err == nil && m["modegrid_memory_budget_in_use_bytes"] > 0 {
			held = m["modegrid_memory_budget_in_use_bytes"]
			break
		}
		select {
		case f := <-first:
			done = &f
		case <-time.After(time.Millisecond):
		case <-ctx.Done():
			return o, ctx.Err()
		}
	}
	// The second's grid: its estimate (taken as proportional to the
	// points) over what the first leaves free, within the budget.
	n2 := n - 1
	if held > 0 {
		target := min(0.95*budget, max(1.1*(budget-held), held*float64(n2*n2*n2)/float64(n*n*n)))
		n2 = uint32(float64(n) * math.Cbrt(target/held))
		if n2 == n {
			n2++
		}
	}
	var second outcome
	call(&second, func() error { _, err := a.c.Thermal(ctx, req(n2)); return err })
	if done == nil {
		f := <-first
		done = &f
	}
	o.codes = append(done.codes, second.codes...)
	o.msg = joinNonEmpty(done.msg, second.msg, "; ")
	o.elapsed = time.Since(start)
	o.note = fmt.Sprintf("grids %d³ and %d³, budget %.0f MiB, the first holding %.0f MiB when the second was sent; first %.0f ms, second %.0f ms", n, n2,
		budget/(1<<20), held/(1<<20), ms(done.elapsed), ms(second.elapsed))
	return o, nil
}

// cancelStream cancels a modes stream once its first message has arrived.
func cancelStream(ctx context.Context, a *arena) (outcome, error) {
	var o outcome
	cctx, cancel := context.WithCancel(ctx)
	defer cancel()
	pts := make([][3]float64, 1000)
	for i := range pts {
		pts[i] = [3]float64{float64(i) / 1000, 0.25, 0.125}
	}
	var at time.Time
	call(&o, func() error {
		return a.c.StreamModes(cctx, &modegridv1.ComputeModesRequest{Model: model(64, true), Qpoints: client.QList(pts...), Eigenvectors: true},
			func(*modegridv1.ComputeModesResponse) error {
				if at.IsZero() {
					at = time.Now()
					cancel()
				}
				return nil
			})
	})
	o.canceled = at
	return o, nil
}

// restartUnderLoad: six callers on a client with the library's defaults
// (waiting for a ready server, retries) keep calling while the server is
// stopped with SIGTERM and a new one started on the same port. Every call
// must succeed; the time is from the signal to every caller's first
// success on the new server.
func restartUnderLoad(ctx context.Context, a *arena) (outcome, error) {
	var o outcome
	c, err := client.Dial(a.ch.addr)
	if err != nil {
		return o, err
	}
	defer c.Close()
	rl := newRestartLoad(ctx, c, 6)
	defer rl.stop()
	if err := rl.waitAll(ctx); err != nil {
		return o, fmt.Errorf("%w: before the restart: %v", errUnexpected, err)
	}
	old := a.ch
	a.peakBefore, _ = old.peakRSS()
	signalled := time.Now()
	exits, code := stopChild(old)
	a.exitsBefore += exits
	down := time.Since(signalled)
	ch, err := startChild(ctx, a.bin, append(slices.Clone(a.args), "--listen", old.addr), a.env, 30*time.Second)
	if err != nil {
		return o, fmt.Errorf("%w: the new server: %v", errUnexpected, err)
	}
	a.ch, a.metrics = ch, "http://"+ch.metricsAddr+"/metrics"
	a.c.Close()
	if a.c, err = client.Dial(ch.addr, client.WithMaxAttempts(1), client.WithFailFast()); err != nil {
		return o, err
	}
	if err := rl.waitAll(ctx); err != nil {
		return o, fmt.Errorf("%w: after the restart: %v", errUnexpected, err)
	}
	o.elapsed = time.Since(signalled)
	rl.stop()
	o.codes, o.msg = rl.codes()
	o.note = fmt.Sprintf("old server exited %d after %.0f ms; %d calls", code, ms(down), len(o.codes))
	return o, nil
}

// restartLoad is callers calling in a loop until stopped.
type restartLoad struct {
	c       *client.Client
	cancel  context.CancelFunc
	wg      sync.WaitGroup
	mu      sync.Mutex      // protects results and waiters
	results []error         // every call's result
	waiters []chan struct{} // per caller: closed at its next success
	once    sync.Once
}

func newRestartLoad(ctx context.Context, c *client.Client, n int) *restartLoad {
	ctx, cancel := context.WithCancel(ctx)
	rl := &restartLoad{c: c, cancel: cancel, waiters: make([]chan struct{}, n)}
	for i := range n {
		rl.waiters[i] = make(chan struct{})
		rl.wg.Add(1)
		go rl.caller(ctx, i)
	}
	return rl
}

// caller i makes checks, modes streams and DOS calls on one model (sent
// by hash once the server knows it), each with a 10 s deadline.
func (rl *restartLoad) caller(ctx context.Context, i int) {
	defer rl.wg.Done()
	m := client.Inline(supercell(2, true))
	for ctx.Err() == nil {
		cctx, cancel := context.WithTimeout(ctx, 10*time.Second)
		var err error
		switch i % 3 {
		case 0:
			_, err = rl.c.Check(cctx, &modegridv1.CheckModelRequest{Model: m})
		case 1:
			_, err = rl.c.Modes(cctx, &modegridv1.ComputeModesRequest{Model: m, Qpoints: client.Grid(2, 2, 2)})
		default:
			_, err = rl.c.DOS(cctx, &modegridv1.ComputeDosRequest{Model: m, Qpoints: client.Grid(4, 4, 4)})
		}
		cancel()
		if ctx.Err() != nil {
			return // stopped: the call's result is the suite's doing
		}
		rl.mu.Lock()
		rl.results = append(rl.results, err)
		if err == nil {
			select {
			case <-rl.waiters[i]:
			default:
				close(rl.waiters[i])
			}
		}
		rl.mu.Unlock()
	}
}

// waitAll waits for every caller's next success, arming fresh waiters.
func (rl *restartLoad) waitAll(ctx context.Context) error {
	rl.mu.Lock()
	ws := make([]chan struct{}, len(rl.waiters))
	for i := range rl.waiters {
		rl.waiters[i] = make(chan struct{})
		ws[i] = rl.waiters[i]
	}
	rl.mu.Unlock()
	t := time.NewTimer(hangLimit)
	defer t.Stop()
	for i, w := range ws {
		select {
		case <-w:
		case <-t.C:
			return fmt.Errorf("caller %d had no success within %v", i, hangLimit)
		case <-ctx.Done():
			return ctx.Err()
		}
	}
	return nil
}

func (rl *restartLoad) stop() {
	rl.once.Do(func() {
		rl.cancel()
		rl.wg.Wait()
	})
}

// codes is every call's status and the first error's message.
func (rl *restartLoad) codes() ([]codes.Code, string) {
	rl.mu.Lock()
	defer rl.mu.Unlock()
	var out []codes.Code
	msg := ""
	for _, err := range rl.results {
		out = append(out, status.Code(err))
		if err != nil && msg == "" {
			msg = shorten(err.Error())
		}
	}
	return out, msg
}

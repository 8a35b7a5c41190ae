package main

// The adversarial suite (--adversarial): requests that once took a
// replica down — memory bombs, CPU bombs, replies over the message cap,
// deadlines in the middle of a stage, panics injected into the engine's
// workers, a restart under load — each sent to a freshly spawned modegridd
// on loopback, so that the peak resident set (VmHWM) of every row is that
// row's alone. For every row it records the status, the time to refusal
// (or to the end of the call), the time from the client's cancellation or
// deadline to the server's slot and memory being released (polled on its
// metrics endpoint), the server's peak RSS, whether the server still
// serves afterwards (a health check and a small computation) and whether
// the process exited on its own (it never should).
//
// The short form (the default) uses small variants of the long form's
// requests so that `go test` runs it in seconds; the long form (--long)
// sends the requests at their full size.

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"slices"
	"strings"
	"time"

	"google.golang.org/grpc/codes"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// advMemoryLimit is the GOMEMLIMIT of every spawned server: the setting of
// the replica whose crashes the suite reproduces. The memory budget is
// derived from it unless a row sets --memory-budget.
const advMemoryLimit = "2700MiB"

// faultHeader marks a call whose engine workers the server (started with
// --unsafe-fault-injection) makes panic.
const faultHeader = "x-test-engine-fault"

// hangLimit is how long the suite waits for anything the server should do
// by itself (a slot released, a process exited) before calling it hung.
const hangLimit = 2 * time.Minute

// Kinds of attack, deciding what is measured.
const (
	expectRefusal = "refusal" // refused before any work: the time is the time to refuse
	expectCancel  = "cancel"  // ended by the client's deadline or cancellation: release is measured
	expectRun     = "run"     // computes (or is refused while another computes)
)

// attack is one row of the suite.
type attack struct {
	name  string     // the request, as printed
	kind  string     // expectRefusal, expectCancel or expectRun
	args  []string   // extra modegridd flags
	want  codes.Code // the status the call must end with
	also  codes.Code // another acceptable status (OK when unused)
	short bool       // part of the short form
	long  bool       // part of the long form
	// run makes the call(s) and reports how they ended.
	run func(ctx context.Context, a *arena) (outcome, error)
}

// outcome is how an attack's call ended.
type outcome struct {
	codes    []codes.Code // one per call made
	msg      string       // the first error's message, shortened
	elapsed  time.Duration
	warm     time.Duration // a refusal sent again once the model is compiled (0: not sent)
	canceled time.Time     // when the client cancelled or its deadline passed (zero: it did not)
	note     string
}

// arena is the server an attack runs against.
type arena struct {
	ch      *child
	c       *client.Client
	metrics string // /metrics URL
	bin     string
	env     []string
	args    []string
	// peakBefore is the peak RSS of servers the attack stopped and
	// replaced (restart under load).
	peakBefore uint64
	// exitsBefore counts the unasked-for exits of those servers.
	exitsBefore int
}

// Row is one line of the suite's table.
type Row struct {
	Request      string   `json:"request"`
	Codes        []string `json:"codes"`
	Want         string   `json:"want"`
	Message      string   `json:"message,omitempty"`
	TimeMs       float64  `json:"time_ms"`         // to refusal or to the end of the call
	WarmMs       float64  `json:"warm_ms"`         // a refusal sent again with the model compiled (-1: not sent)
	ReleaseMs    float64  `json:"release_ms"`      // from cancellation to slot and memory free (-1: no cancellation)
	Released     bool     `json:"released"`        // slots, queue and budget back to 0 after the call
	WorkDone     bool     `json:"work_done"`       // computations beyond compiling, or q-points, were counted
	PeakRSSBytes uint64   `json:"peak_rss_bytes"`  // VmHWM of the server
	BudgetBytes  float64  `json:"budget_bytes"`    // the server's memory budget
	Serving      bool     `json:"serving"`         // health SERVING and a small computation OK afterwards
	Exits        int      `json:"exits"`           // exits of the server not asked for, or non-zero exit codes
	ExitCode     int      `json:"exit_code"`       // of the server after SIGTERM at the end of the row
	Note         string   `json:"note,omitempty"`  // anything else measured
	Err          string   `json:"error,omitempty"` // the suite could not run the row
	kind         string   // expectRefusal, …
	wantCodes    []codes.Code
	gotCodes     []codes.Code
}

// Pass says whether the row met the outcomes the short test asserts (not
// the time and memory goals, which are figures).
func (r *Row) Pass() bool {
	if r.Err != "" || !r.Serving || r.Exits != 0 || r.ExitCode != 0 || !r.Released {
		return false
	}
	if r.kind == expectRefusal && r.WorkDone {
		return false
	}
	for _, c := range r.gotCodes {
		if !slices.Contains(r.wantCodes, c) {
			return false
		}
	}
	return len(r.gotCodes) > 0
}

// adversarial runs the suite (long or short; only the rows whose request
// contains only) against bin and returns its rows.
func adversarial(ctx context.Context, bin string, long bool, only string, progress io.Writer) []*Row {
	var rows []*Row
	for _, at := range attacks() {
		if (long && !at.long) || (!long && !at.short) || !strings.Contains(at.name, only) {
			continue
		}
		fmt.Fprintf(progress, "adversarial: %s\n", at.name)
		r := runAttack(ctx, bin, at)
		fmt.Fprintf(progress, "adversarial:   %s in %.1f ms, release %.1f ms, peak RSS %.0f MiB, serving %v, exits %d %s\n",
			strings.Join(r.Codes, "+"), r.TimeMs, r.ReleaseMs, float64(r.PeakRSSBytes)/(1<<20), r.Serving, r.Exits, r.Err)
		rows = append(rows, r)
	}
	return rows
}

// runAttack spawns a server for at, runs it, checks the server and stops it.
func runAttack(ctx context.Context, bin string, at attack) *Row {
	r := &Row{Request: at.name, kind: at.kind, ReleaseMs: -1, wantCodes: []codes.Code{at.want}}
	if at.also != codes.OK || at.want == codes.OK {
		r.wantCodes = append(r.wantCodes, at.also)
	}
	r.wantCodes = slices.Compact(r.wantCodes)
	for _, c := range r.wantCodes {
		r.Want = joinNonEmpty(r.Want, c.String(), " or ")
	}
	env := []string{"GOMEMLIMIT=" + advMemoryLimit}
	args := append([]string{"--unsafe-fault-injection"}, at.args...) // logs at info: the serving line tells the addresses
	ch, err := startChild(ctx, bin, args, env, 30*time.Second)
	if err != nil {
		r.Err = err.Error()
		return r
	}
	a := &arena{ch: ch, metrics: "http://" + ch.metricsAddr + "/metrics", bin: bin, env: env, args: args}
	defer func() {
		if a.c != nil {
			a.c.Close()
		}
		a.ch.kill()
	}()
	a.c, err = client.Dial(ch.addr, client.WithMaxAttempts(1), client.WithFailFast())
	if err != nil {
		r.Err = err.Error()
		return r
	}
	// Connect first (the client connects lazily), so that no row's time
	// includes the TCP and HTTP/2 handshakes.
	if err := serving(ctx, a.c); err != nil {
		r.Err = "before the attack: " + err.Error()
		return r
	}
	before, err := scrape(ctx, a.metrics)
	if err != nil {
		r.Err = err.Error()
		return r
	}
	r.BudgetBytes = before["modegrid_memory_budget_bytes"]

	o, err := at.run(ctx, a)
	if err != nil {
		r.Err = err.Error()
	}
	r.gotCodes = o.codes
	for _, c := range o.codes {
		r.Codes = append(r.Codes, c.String())
	}
	r.Message, r.Note = o.msg, o.note
	r.TimeMs, r.WarmMs = ms(o.elapsed), -1
	if o.warm > 0 {
		r.WarmMs = ms(o.warm)
	}

	// Release: every slot, queue place and byte of budget free again.
	freed, at0, err := waitReleased(ctx, a.metrics)
	r.Released = freed
	if err != nil {
		r.Err = joinNonEmpty(r.Err, err.Error(), "; ")
	}
	if !o.canceled.IsZero() && freed {
		r.ReleaseMs = max(0, ms(at0.Sub(o.canceled)))
	}
	if after, err := scrape(ctx, a.metrics); err == nil {
		r.WorkDone = work(after) != work(before)
	}
	peak, _ := a.ch.peakRSS()
	r.PeakRSSBytes = max(peak, a.peakBefore)
	r.Serving = stillServing(ctx, a.c)
	r.Exits, r.ExitCode = stopChild(a.ch)
	r.Exits += a.exitsBefore
	return r
}

// joinNonEmpty joins a and b with sep, leaving out an empty side.
func joinNonEmpty(a, b, sep string) string {
	switch {
	case a == "":
		return b
	case b == "":
		return a
	}
	return a + sep + b
}

func ms(d time.Duration) float64 { return float64(d.Microseconds()) / 1000 }

// work is the server's count of work beyond compiling models: computations
// of every other kind plus q-points diagonalised.
func work(m map[string]float64) float64 {
	return sum(m, "modegrid_computations_total") - m[`modegrid_computations_total{kind="compile"}`] +
		m["modegrid_qpoints_diagonalized_total"]
}

// waitReleased polls the metrics until no computation holds a slot or
// waits for one and no memory of the budget is reserved, and returns when
// that was first seen. After hangLimit it gives up (a hang).
func waitReleased(ctx context.Context, url string) (bool, time.Time, error) {
	end := time.Now().Add(hangLimit)
	for {
		m, err := scrape(ctx, url)
		now := time.Now()
		if err == nil && m["modegrid_computations_in_flight"] == 0 && m["modegrid_computations_queued"] == 0 &&
			m["modegrid_memory_budget_in_use_bytes"] == 0 {
			return true, now, nil
		}
		if now.After(end) || ctx.Err() != nil {
			return false, now, fmt.Errorf("slots or memory still held %v after the call (in flight %v, queued %v, budget in use %v B; scrape: %v)",
				hangLimit, m["modegrid_computations_in_flight"], m["modegrid_computations_queued"], m["modegrid_memory_budget_in_use_bytes"], err)
		}
		time.Sleep(time.Millisecond) // a measuring tool polling; not a test's synchronisation
	}
}

// stillServing: health SERVING and a small computation OK.
func stillServing(ctx context.Context, c *client.Client) bool {
	cctx, cancel := context.WithTimeout(ctx, 30*time.Second)
	defer cancel()
	if serving(cctx, c) != nil {
		return false
	}
	r, err := c.DOS(cctx, &modegridv1.ComputeDosRequest{Model: client.Inline(supercell(1, false)), Qpoints: client.Grid(4, 4, 4)})
	return err == nil && len(r.GetDos()) > 0
}

// serving checks that the server's health is SERVING.
func serving(ctx context.Context, c *client.Client) error {
	cctx, cancel := context.WithTimeout(ctx, 30*time.Second)
	defer cancel()
	h, err := healthpb.NewHealthClient(c.Conn()).Check(cctx, &healthpb.HealthCheckRequest{})
	if err == nil && h.GetStatus() != healthpb.HealthCheckResponse_SERVING {
		err = fmt.Errorf("health %v", h.GetStatus())
	}
	return err
}

// stopChild sends SIGTERM and waits for the exit: an exit before the
// signal counts as an unasked-for exit, as does a non-zero code.
func stopChild(ch *child) (exits, code int) {
	select {
	case <-ch.exited:
		exits++
	default:
		ch.terminate()
	}
	code, err := ch.wait(hangLimit)
	if err != nil || code != 0 {
		exits++
	}
	return exits, code
}

// call times fn and records its code.
func call(o *outcome, fn func() error) error {
	start := time.Now()
	err := fn()
	o.elapsed += time.Since(start)
	o.codes = append(o.codes, status.Code(err))
	if err != nil && o.msg == "" {
		o.msg = shorten(status.Convert(err).Message())
	}
	return err
}

// shorten keeps a message to one table cell.
func shorten(s string) string {
	s = strings.ReplaceAll(s, "|", "/")
	if r := []rune(s); len(r) > 110 {
		return string(r[:110]) + "…"
	}
	return s
}

// supercell is a k×k×k supercell of a simple cubic crystal (edge 2 Å,
// nearest-neighbour springs): k³ sites. With distinct, every site has its
// own mass, so no symmetry but time reversal relates the q-points (the
// grid is not reduced); otherwise all masses are equal and the lattice
// has the full cubic symmetry for the symmetry search to find.
func supercell(k int, distinct bool) *modegridv1.Crystal {
	a := 2.0 * float64(k)
	c := &modegridv1.Crystal{
		Name:          fmt.Sprintf("cubic-%d", k*k*k),
		Lattice:       []*modegridv1.Vec3{{X: a}, {Y: a}, {Z: a}},
		Polarizations: 3,
		ForceUnit:     modegridv1.ForceUnit_FORCE_UNIT_EV_PER_A2,
		Shells:        []*modegridv1.Shell{{FromLabel: "M", ToLabel: "M", Shell: 1, KLong: 1.2, KTrans: 0.3}},
	}
	for i := range k * k * k {
		mass := 50.0
		if distinct {
			mass += 0.01 * float64(i)
		}
		c.Sites = append(c.Sites, &modegridv1.Site{Label: "M", MassAmu: mass,
			Frac: []float64{float64(i/(k*k)) / float64(k), float64(i/k%k) / float64(k), float64(i%k) / float64(k)}})
	}
	return c
}

// sizes are the sites of supercells k³ by name.
var sizes = map[int]int{8: 2, 27: 3, 64: 4, 216: 6, 512: 8}

// model is a supercell of n sites (n one of sizes' keys).
func model(n int, distinct bool) *modegridv1.ModelSource {
	return client.Inline(supercell(sizes[n], distinct))
}

// withDeadline runs fn under a deadline d and records when it passed.
func withDeadline(ctx context.Context, o *outcome, d time.Duration, fn func(ctx context.Context) error) error {
	cctx, cancel := context.WithTimeout(ctx, d)
	defer cancel()
	deadline, _ := cctx.Deadline()
	err := call(o, func() error { return fn(cctx) })
	if status.Code(err) == codes.DeadlineExceeded {
		o.canceled = deadline
	}
	return err
}

// errUnexpected wraps a failure of the suite itself.
var errUnexpected = errors.New("adversarial")

// faulty marks ctx for the engine fault.
func faulty(ctx context.Context, what string) context.Context {
	return metadata.AppendToOutgoingContext(ctx, faultHeader, "adversarial suite: injected panic in "+what)
}

// Goals of the suite's figures (the issue's; figures, not assertions).
const (
	goalRSSOverBudget = 64 << 20 // peak RSS ≤ memory budget + this
	goalRefuseMs      = 5.0      // refusal before work
	goalReleaseMs     = 100.0    // from cancellation to slot and memory free
)

// runAdversarial runs the suite for the command line o and prints its
// table (or JSON). It exits 1 when a row's outcome is wrong (status,
// work before refusal, a slot not released, the server not serving or
// exiting); the time and memory goals are reported, not enforced.
func runAdversarial(ctx context.Context, o *options, stdout, stderr io.Writer) int {
	rows := adversarial(ctx, o.spawn, o.long, o.only, stderr)
	if o.jsonOut {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		enc.Encode(rows)
	} else {
		printAdversarial(stdout, rows, o.long)
	}
	for _, r := range rows {
		if !r.Pass() {
			return 1
		}
	}
	return 0
}

// codeCounts prints codes as "OK", "InvalidArgument ×2", in first-seen order.
func codeCounts(cs []string) string {
	var order []string
	n := map[string]int{}
	for _, c := range cs {
		if n[c] == 0 {
			order = append(order, c)
		}
		n[c]++
	}
	var parts []string
	for _, c := range order {
		if n[c] > 1 {
			parts = append(parts, fmt.Sprintf("%s ×%d", c, n[c]))
		} else {
			parts = append(parts, c)
		}
	}
	if len(parts) == 0 {
		return "—"
	}
	return strings.Join(parts, ", ")
}

// printAdversarial prints the rows as a markdown table and the goals met
// or missed.
func printAdversarial(w io.Writer, rows []*Row, long bool) {
	form := "short"
	if long {
		form = "long"
	}
	fmt.Fprintf(w, "Adversarial suite (%s form): a fresh modegridd per row, GOMEMLIMIT=%s, its other settings default unless the row says.\n\n", form, advMemoryLimit)
	fmt.Fprintln(w, "| request | status | time to refuse / end (ms; warm: sent again, model compiled) | release after cancel (ms) | server peak RSS (MiB) | budget (MiB) | still serving | process exits | note |")
	fmt.Fprintln(w, "|---|---|---|---|---|---|---|---|---|")
	for _, r := range rows {
		rel := "—"
		if r.ReleaseMs >= 0 {
			rel = fmt.Sprintf("%.1f", r.ReleaseMs)
		} else if !r.Released {
			rel = "not released"
		}
		serving := "yes"
		if !r.Serving {
			serving = "**no**"
		}
		note := joinNonEmpty(r.Message, r.Note, "; ")
		if r.kind == expectRefusal && r.WorkDone {
			note = joinNonEmpty("**work started before the refusal**", note, "; ")
		}
		if r.Err != "" {
			note = joinNonEmpty("**suite error: "+shorten(r.Err)+"**", note, "; ")
		}
		status := codeCounts(r.Codes)
		if !r.Pass() {
			status = "**" + status + "** (want " + r.Want + ")"
		}
		t := fmt.Sprintf("%.1f", r.TimeMs)
		if r.WarmMs >= 0 {
			t += fmt.Sprintf(" (%.1f warm)", r.WarmMs)
		}
		fmt.Fprintf(w, "| %s | %s | %s | %s | %.0f | %.0f | %s | %d | %s |\n", r.Request, status, t, rel,
			float64(r.PeakRSSBytes)/(1<<20), r.BudgetBytes/(1<<20), serving, r.Exits, note)
	}
	fmt.Fprintln(w)
	for _, line := range goalLines(rows) {
		fmt.Fprintln(w, "- "+line)
	}
}

// goalLines compares the figures with the goals, naming every miss.
func goalLines(rows []*Row) []string {
	var rss, refuse, release, exits []string
	for _, r := range rows {
		if lim := r.BudgetBytes + goalRSSOverBudget; r.BudgetBytes > 0 && float64(r.PeakRSSBytes) > lim {
			rss = append(rss, fmt.Sprintf("%s: %.0f MiB > %.0f MiB", r.Request, float64(r.PeakRSSBytes)/(1<<20), lim/(1<<20)))
		}
		if r.kind == expectRefusal && max(r.TimeMs, r.WarmMs) >= goalRefuseMs {
			refuse = append(refuse, fmt.Sprintf("%s: %.1f ms cold (model compiled first), %.1f ms warm", r.Request, r.TimeMs, r.WarmMs))
		}
		if r.kind == expectCancel && (r.ReleaseMs < 0 || r.ReleaseMs >= goalReleaseMs) {
			release = append(release, fmt.Sprintf("%s: %.1f ms", r.Request, r.ReleaseMs))
		}
		if r.Exits != 0 {
			exits = append(exits, fmt.Sprintf("%s: %d", r.Request, r.Exits))
		}
	}
	verdict := func(goal string, misses []string) string {
		if len(misses) == 0 {
			return goal + ": met by every row"
		}
		return goal + ": **missed** by " + strings.Join(misses, "; ")
	}
	return []string{
		verdict("peak RSS ≤ memory budget + 64 MiB", rss),
		verdict("refusal before work in under 5 ms", refuse),
		verdict("slot and memory released within 100 ms of cancellation", release),
		verdict("0 process exits", exits),
	}
}

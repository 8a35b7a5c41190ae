package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// env is what a command writes to.
type env struct {
	stdout, stderr io.Writer
	prog           *progress
}

// note prints a one-line remark on stderr.
func (e *env) note(format string, args ...any) {
	fmt.Fprintf(e.stderr, "modegrid: note: "+format+"\n", args...)
}

// connFlags choose the server and how to reach it.
type connFlags struct {
	server, token, ca, cert, key string
	tls                          bool
	wait                         time.Duration // how long a call waits for a ready server
}

func (c *connFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&c.server, "server", "", "modegridd address host:port or dns:///name:port (default: an embedded server in this process)")
	fs.StringVar(&c.token, "token", "", "bearer token sent with every call (default: $MODEGRID_TOKEN)")
	fs.BoolVar(&c.tls, "tls", false, "use TLS, verifying the server against the system roots")
	fs.StringVar(&c.ca, "ca", "", "PEM file of the CA that signed the server certificate (implies --tls)")
	fs.StringVar(&c.cert, "cert", "", "PEM client certificate for mutual TLS (with --key)")
	fs.StringVar(&c.key, "key", "", "PEM client key for mutual TLS (with --cert)")
	fs.DurationVar(&c.wait, "wait", client.DefaultReadyWait, "how long a call waits for an unreachable --server (restarting, say) before giving up")
}

func (c *connFlags) check() error {
	if (c.cert == "") != (c.key == "") {
		return usagef("--cert and --key go together")
	}
	if c.wait <= 0 {
		return usagef("--wait must be > 0, got %v", c.wait)
	}
	if c.server == "" && (c.tls || c.ca != "" || c.cert != "") {
		return usagef("--tls, --ca and --cert need --server (the embedded server is in this process, reached without a network)")
	}
	if c.token == "" {
		c.token = os.Getenv("MODEGRID_TOKEN")
	}
	return nil
}

// options are the client options the flags ask for.
func (c *connFlags) options() []client.Option {
	o := []client.Option{client.WithReadyWait(c.wait)}
	if c.tls {
		o = append(o, client.WithTLS(nil))
	}
	if c.ca != "" {
		o = append(o, client.WithCAFile(c.ca))
	}
	if c.cert != "" {
		o = append(o, client.WithClientCertificate(c.cert, c.key))
	}
	// The embedded server (no --server) is in this process and checks no
	// token, so none is sent to it.
	if c.token != "" && c.server != "" {
		o = append(o, client.WithToken(c.token))
	}
	return o
}

// outFlags choose the output format and destinations.
type outFlags struct {
	format string
	out    string
	plot   string
	kind   string // "png" or "svg" when plot is set
	// explicit is true when --format or --out was given; with --plot alone
	// the table is not printed.
	explicit bool
}

func (o *outFlags) register(fs *flag.FlagSet, withPlot bool) {
	fs.StringVar(&o.format, "format", "table", "output format: table, csv or json")
	fs.StringVar(&o.out, "out", "", "write the output to FILE instead of standard output")
	if withPlot {
		fs.StringVar(&o.plot, "plot", "", "also draw a figure into FILE.png or FILE.svg")
	}
}

func (o *outFlags) check(fs *flag.FlagSet) error {
	f, err := parseFormat(o.format)
	if err != nil {
		return usagef("%v", err)
	}
	o.format = f
	if o.plot != "" {
		if o.kind, err = plotKind(o.plot); err != nil {
			return usagef("%v", err)
		}
	}
	fs.Visit(func(f *flag.Flag) {
		if f.Name == "format" || f.Name == "out" {
			o.explicit = true
		}
	})
	return nil
}

// wantsOutput says whether the formatted output is written.
func (o *outFlags) wantsOutput() bool { return o.plot == "" || o.explicit }

// write runs fn on standard output or on the --out file.
func (o *outFlags) write(stdout io.Writer, fn func(io.Writer) error) error {
	if !o.wantsOutput() {
		return nil
	}
	if o.out == "" {
		return fn(stdout)
	}
	f, err := os.Create(o.out)
	if err != nil {
		return fmt.Errorf("cannot write the output: %w", err)
	}
	if err := fn(f); err != nil {
		f.Close()
		return err
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("cannot write the output: %w", err)
	}
	return nil
}

// modelFlag is --model / -m.
type modelFlag struct{ path string }

func (m *modelFlag) register(fs *flag.FlagSet) {
	fs.StringVar(&m.path, "model", "", "model file by extension: .json (protobuf JSON of modegrid.v1.Crystal), .pb or .binpb (protobuf binary of modegrid.v1.Crystal), .npz (NumPy supercell force constants)")
	fs.StringVar(&m.path, "m", "", "shorthand for --model")
}

// load reads the model: a missing --model or an unreadable file is a usage
// error, a file that is not a model is an invalid model.
func (m *modelFlag) load() (*modegridv1.Crystal, error) {
	if m.path == "" {
		return nil, usagef("--model FILE is required")
	}
	b, err := os.ReadFile(m.path)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, usagef("model file %s does not exist", m.path)
		}
		return nil, usagef("cannot read model file %s: %v", m.path, err)
	}
	c, err := parseModelFile(m.path, b)
	if err != nil {
		return nil, &invalidError{msg: fmt.Sprintf("model file %s is not a valid model: %v", m.path, err)}
	}
	return c, nil
}

// parseModelFile decodes a model file by its extension: .npz is a NumPy
// supercell force-constant set, read here; the rest as the client library
// reads them (client.ParseModelFile): .pb and .binpb the protobuf binary
// of a Crystal (the same message as the JSON file, so the two convert one
// to one), anything else protobuf JSON.
func parseModelFile(path string, b []byte) (*modegridv1.Crystal, error) {
	if strings.EqualFold(filepath.Ext(path), ".npz") {
		return loadNPZ(path, b)
	}
	c, err := client.ParseModelFile(path, b)
	if err != nil {
		return nil, errors.New(jsonProblem(err))
	}
	return c, nil
}

// jsonProblem returns the decoder's own words, without the "parse
// model:" and "proto:" prefixes (protobuf-go separates the latter with a
// space or a no-break space).
func jsonProblem(err error) string {
	msg := strings.TrimPrefix(err.Error(), "parse model: ")
	if rest, ok := strings.CutPrefix(msg, "proto:"); ok {
		msg = strings.TrimLeft(rest, " \u00a0")
	}
	return msg
}

// dims returns the dimensionality d and polarizations p of a model file.
func dims(c *modegridv1.Crystal) (d, p int) {
	d, p = len(c.GetLattice()), int(c.GetPolarizations())
	if p == 0 {
		p = 3
	}
	return d, p
}

// qsetFlags choose a q-point set.
type qsetFlags struct {
	q, grid, cells string
	shift          bool
}

func (q *qsetFlags) register(fs *flag.FlagSet, allowList bool) {
	if allowList {
		fs.StringVar(&q.q, "q", "", `q-points, fractional reciprocal: "a,b,c;a,b,c"`)
	}
	fs.StringVar(&q.grid, "grid", "", "Monkhorst–Pack grid N1xN2xN3, or one N for every direction")
	fs.BoolVar(&q.shift, "shift", false, "shift the grid by half a step")
	fs.StringVar(&q.cells, "cells", "", "finite crystal of N1xN2xN3 cells (its allowed wavevectors)")
}

// defaultMesh is the grid of DOS and thermal calls without --grid or
// --cells, per dimensionality.
var defaultMesh = map[int]uint32{1: 512, 2: 64, 3: 24}

// set builds the q-point set for a d-dimensional crystal; with none given
// it returns the default grid (or, without one, a usage error).
func (q *qsetFlags) set(dim int, useDefault bool) (*modegridv1.QPointSet, error) {
	n := 0
	for _, s := range []string{q.q, q.grid, q.cells} {
		if s != "" {
			n++
		}
	}
	switch {
	case n > 1:
		return nil, usagef("give only one of --q, --grid and --cells")
	case q.shift && q.grid == "":
		return nil, usagef("--shift needs --grid")
	case q.q != "":
		pts, err := parseQList(q.q)
		if err != nil {
			return nil, usagef("--q: %v", err)
		}
		return client.QList(pts...), nil
	case q.grid != "":
		mesh, err := parseMesh(q.grid)
		if err != nil {
			return nil, usagef("--grid %v", err)
		}
		if q.shift {
			return client.ShiftedGrid(expandMesh(mesh, dim)...), nil
		}
		return client.Grid(expandMesh(mesh, dim)...), nil
	case q.cells != "":
		mesh, err := parseMesh(q.cells)
		if err != nil {
			return nil, usagef("--cells %v", err)
		}
		return client.Cells(expandMesh(mesh, dim)...), nil
	case useDefault:
		return client.Grid(expandMesh([]uint32{defaultMeshFor(dim)}, dim)...), nil
	}
	return nil, usagef("give the q-points: --q, --grid or --cells")
}

func defaultMeshFor(dim int) uint32 {
	if n, ok := defaultMesh[dim]; ok {
		return n
	}
	return defaultMesh[3]
}

// describe names a q-point set for notes and titles.
func describe(s *modegridv1.QPointSet) string {
	join := func(v []uint32) string {
		p := make([]string, len(v))
		for i, x := range v {
			p[i] = fmt.Sprint(x)
		}
		return strings.Join(p, "×")
	}
	switch {
	case s.GetGrid() != nil && len(s.GetGrid().GetMesh()) == 1:
		d := fmt.Sprintf("%d-point grid", s.GetGrid().GetMesh()[0])
		if s.GetGrid().GetShifted() {
			d += " (shifted)"
		}
		return d
	case s.GetGrid() != nil:
		d := join(s.GetGrid().GetMesh()) + " grid"
		if s.GetGrid().GetShifted() {
			d += " (shifted)"
		}
		return d
	case s.GetCells() != nil:
		return join(s.GetCells().GetCells()) + " cells"
	}
	return fmt.Sprintf("%d q-points", len(s.GetList().GetPoints()))
}

// newFlagSet returns a flag set whose errors become usage errors and whose
// -h prints the command's help to stderr.
func newFlagSet(name string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	return fs
}

// parse parses flags. -h/--help prints the command's flags to stderr.
func parse(fs *flag.FlagSet, args []string, stderr io.Writer, summary string) error {
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			fmt.Fprintf(stderr, "usage: modegrid %s [flags]\n\n%s\n\nflags:\n", fs.Name(), summary)
			fs.SetOutput(stderr)
			fs.PrintDefaults()
			return err
		}
		return usagef("%s: %v", fs.Name(), err)
	}
	if fs.NArg() > 0 {
		return usagef("%s: unexpected argument %q (flags come as --name value)", fs.Name(), fs.Arg(0))
	}
	return nil
}

// modelCommand bundles what every model-taking subcommand shares: the
// model, connection and output flags, --sum-rule, and the steps from
// parsing to a connected client.
type modelCommand struct {
	fs      *flag.FlagSet
	m       modelFlag
	conn    connFlags
	out     outFlags
	sumRule *bool
	// chargeRule imposes charge neutrality on Born charges.
	chargeRule *bool
	// symTol is the symmetry tolerance (Å, 0: the server's default) and
	// symmetrize asks for the model made exactly symmetric.
	symTol     *float64
	symmetrize *bool
}

// newModelCommand registers the shared flags; plots says whether --plot
// is offered.
func newModelCommand(name string, plots bool) *modelCommand {
	c := &modelCommand{fs: newFlagSet(name)}
	c.m.register(c.fs)
	c.conn.register(c.fs)
	c.out.register(c.fs, plots)
	c.sumRule = c.fs.Bool("sum-rule", false, "impose the acoustic sum rule on explicit blocks")
	c.chargeRule = c.fs.Bool("charge-sum-rule", false, "impose charge neutrality (the Born charges sum to zero) by the smallest correction")
	c.symTol = c.fs.Float64("sym-tol", 0, "symmetry `tolerance` in Å: how far sites may be from symmetric positions (0: the default, 1e-4 Å)")
	c.symmetrize = c.fs.Bool("symmetrize", false, "make the model exactly symmetric under the operations found within --sym-tol (a new model, new hash); a supercell set is averaged over its space group")
	return c
}

// parse parses args and checks the shared flags.
func (c *modelCommand) parse(args []string, e *env, summary string) error {
	if err := parse(c.fs, args, e.stderr, summary); err != nil {
		return err
	}
	if err := c.out.check(c.fs); err != nil {
		return err
	}
	return c.conn.check()
}

// dial connects (to --server or an embedded server) and returns the client,
// the call context and the function that releases both.
func (c *modelCommand) dial() (*client.Client, context.Context, func(), error) {
	cl, stop, err := connect(c.conn.server, c.conn.options()...)
	if err != nil {
		return nil, nil, nil, err
	}
	ctx, cancel := callContext()
	return cl, ctx, func() { cancel(); stop() }, nil
}

// source is the inline model with the --sum-rule, --charge-sum-rule,
// --sym-tol and --symmetrize choices.
func (c *modelCommand) source(crystal *modegridv1.Crystal) *modegridv1.ModelSource {
	src := client.Inline(crystal)
	src.EnforceSumRule = *c.sumRule
	src.SymmetryToleranceA = *c.symTol
	src.Symmetrize = *c.symmetrize
	src.EnforceChargeNeutrality = *c.chargeRule
	return src
}

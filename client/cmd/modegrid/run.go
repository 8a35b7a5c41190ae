package main

import (
	"bytes"
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"net"
	"strings"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/grpc/test/bufconn"

	"github.com/materials-lab/modegrid/client"
	"github.com/materials-lab/modegrid/server"
)

// Exit codes.
const (
	exitOK          = 0 // success
	exitOther       = 1 // anything else (I/O, server-side failure, ...)
	exitUsage       = 2 // a command-line mistake
	exitInvalid     = 3 // invalid model or request; each bad field printed
	exitUnreachable = 4 // no server could be reached
)

// usageError is a command-line mistake (exit 2).
type usageError struct{ msg string }

func (e *usageError) Error() string { return e.msg }

func usagef(format string, args ...any) error { return &usageError{fmt.Sprintf(format, args...)} }

// invalidError is an invalid model or request found on the client side, or
// an invalid model reported by CheckModel (exit 3).
type invalidError struct {
	msg        string
	violations []string // "field: description"
}

func (e *invalidError) Error() string { return e.msg }

// commands, in the order of the help text.
var commands = []struct {
	name, summary string
	run           func(args []string, e *env) error
}{
	{"check", "validate a model and summarise it (hash, sites, bonds per shell, symmetry, stability)", cmdCheck},
	{"modes", "frequencies at q-points, on a grid or for a finite crystal", cmdModes},
	{"path", "dispersion along a path of high-symmetry points; --plot adds a DOS panel", cmdPath},
	{"dos", "phonon density of states, total and per site", cmdDOS},
	{"thermal", "harmonic heat capacity, entropy, free and internal energy, Debye temperature", cmdThermal},
	{"gruneisen", "mode Grüneisen parameters from models at several volumes", cmdGruneisen},
	{"qha", "quasi-harmonic thermal expansion, bulk modulus and Cp from models at several volumes", cmdQHA},
	{"conductivity", "lattice thermal conductivity of bulk and finite samples, cumulative curves", cmdConductivity},
	{"infrared", "infrared response of a polar model: Γ modes, mode charges, ε(ω), ε₀ and reflectivity", cmdInfrared},
	{"shape", "the motion of one mode as a multi-frame XYZ trajectory (--xyz) or a figure (--plot, 1D and 2D)", cmdShape},
	{"upload", "send a model to --server (any size) and print the hash other calls can name it by", cmdUpload},
	{"fit", "fit force constants to measured frequencies, velocities, elastic constants, heat capacities", cmdFit},
	{"scatter", "one-phonon S(Q, E) of a single crystal along a path, at Q points or on a plane (neutrons, X-rays)", cmdScatter},
	{"powder", "powder-averaged S(|Q|, E) map, coherent and incoherent", cmdPowder},
	{"weighted-dos", "neutron-weighted density of states (incoherent approximation)", cmdWeightedDOS},
	{"demo", "run check, path, dos and thermal on the built-in example crystals", cmdDemo},
}

func usageText() string {
	var b strings.Builder
	b.WriteString("usage: modegrid <command> [flags]     (modegrid <command> -h for its flags)\n\ncommands:\n")
	for _, c := range commands {
		fmt.Fprintf(&b, "  %-12s %s\n", c.name, c.summary)
	}
	b.WriteString(`
common flags:
  -m, --model FILE   model file: .json, .pb/.binpb or .npz (see README); a model too
                     large for one message is uploaded first, then named by hash
  --server ADDR      modegridd address; absent: an embedded server in this process
  --token T          bearer token (default $MODEGRID_TOKEN); --tls, --ca FILE, --cert/--key FILE
  --unit U           thz (default; mev for scatter, powder, weighted-dos), mev or cm-1
  --format F         table (default), csv or json; --out FILE writes it to FILE
  --plot FILE        draw a figure, FILE.png or FILE.svg (path, dos, thermal, qha, conductivity, fit, infrared,
                     scatter, powder, weighted-dos)

exit codes: 0 success, 2 usage error, 3 invalid model or request,
            4 server unreachable, 1 anything else
`)
	return b.String()
}

// run executes the command line args and returns the exit code.
func run(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		fmt.Fprint(stderr, usageText())
		return exitUsage
	}
	switch args[0] {
	case "-h", "--help", "help":
		fmt.Fprint(stdout, usageText())
		return exitOK
	}
	e := &env{stdout: stdout, stderr: stderr, prog: newProgress(stderr, isTerminal(stderr))}
	for _, c := range commands {
		if c.name == args[0] {
			err := c.run(args[1:], e)
			e.prog.clear()
			return report(err, stderr)
		}
	}
	return report(usagef("unknown command %q (commands: check, modes, path, dos, thermal, infrared, gruneisen, qha, conductivity, fit, scatter, powder, weighted-dos, shape, upload, demo)", args[0]), stderr)
}

// report prints err as one clear message (plus one line per bad field) and
// returns the exit code.
func report(err error, stderr io.Writer) int {
	if err == nil || errors.Is(err, flag.ErrHelp) {
		return exitOK
	}
	var ue *usageError
	if errors.As(err, &ue) {
		fmt.Fprintf(stderr, "modegrid: %s.\n(run 'modegrid help' for usage)\n", strings.TrimSuffix(ue.msg, "."))
		return exitUsage
	}
	var ie *invalidError
	if errors.As(err, &ie) {
		fmt.Fprintf(stderr, "modegrid: %s.\n", strings.TrimSuffix(ie.msg, "."))
		for _, v := range ie.violations {
			fmt.Fprintf(stderr, "  %s\n", v)
		}
		return exitInvalid
	}
	var se interface {
		error
		GRPCStatus() *status.Status
	}
	if !errors.As(err, &se) {
		fmt.Fprintf(stderr, "modegrid: %s.\n", strings.TrimSuffix(err.Error(), "."))
		return exitOther
	}
	st := se.GRPCStatus()
	// Context added around the status error ("demo fcc: ") leads the line.
	stderr = prefixed{w: stderr, prefix: strings.TrimSuffix(err.Error(), se.Error())}
	msg := strings.TrimSuffix(st.Message(), ".")
	switch st.Code() {
	case codes.InvalidArgument:
		vs := client.FieldViolations(err)
		fmt.Fprintf(stderr, "modegrid: the server refused the model or request (%d problem%s):\n", max(len(vs), 1), plural(len(vs)))
		for _, v := range vs {
			fmt.Fprintf(stderr, "  %s: %s\n", v.GetField(), v.GetDescription())
		}
		if len(vs) == 0 {
			fmt.Fprintf(stderr, "  %s\n", msg)
		}
		return exitInvalid
	case codes.FailedPrecondition:
		fmt.Fprintf(stderr, "modegrid: the request cannot be met for this model: %s.\n", msg)
		return exitInvalid
	case codes.Unavailable:
		fmt.Fprintf(stderr, "modegrid: the server is unreachable (%s); check --server and that modegridd is running.\n", rootCause(msg))
		return exitUnreachable
	case codes.Unauthenticated:
		fmt.Fprintf(stderr, "modegrid: the server refused the credentials: %s (check --token, --cert and --key).\n", msg)
		return exitOther
	case codes.ResourceExhausted:
		fmt.Fprintf(stderr, "modegrid: the server is busy or a limit was reached: %s.\n", msg)
		return exitOther
	case codes.DeadlineExceeded:
		fmt.Fprintf(stderr, "modegrid: the call took too long: %s.\n", msg)
		return exitOther
	default:
		fmt.Fprintf(stderr, "modegrid: the call failed (%s): %s.\n", st.Code(), msg)
		return exitOther
	}
}

// prefixed inserts a prefix after the "modegrid: " that starts the first
// line written.
type prefixed struct {
	w      io.Writer
	prefix string
}

func (p prefixed) Write(b []byte) (int, error) {
	if p.prefix != "" {
		if rest, ok := bytes.CutPrefix(b, []byte("modegrid: ")); ok {
			if _, err := p.w.Write(append([]byte("modegrid: "+p.prefix), rest...)); err != nil {
				return 0, err
			}
			return len(b), nil
		}
	}
	return p.w.Write(b)
}

// rootCause keeps the last clause of a gRPC transport message ("...: dial
// tcp 127.0.0.1:1: connect: connection refused" → "connection refused").
func rootCause(msg string) string {
	if strings.Contains(msg, "no children to pick from") || strings.Contains(msg, "zero addresses") {
		return "its name resolves to no address"
	}
	msg = strings.TrimRight(strings.TrimSpace(msg), `".`)
	if i := strings.LastIndex(msg, ": "); i >= 0 && i+2 < len(msg) {
		msg = msg[i+2:]
	}
	return strings.Trim(msg, `" `)
}

func plural(n int) string {
	if n == 1 || n == 0 {
		return ""
	}
	return "s"
}

// embeddedBufBytes is the buffer of each direction of the in-memory
// connection to the embedded server; gRPC's flow control bounds what is in
// flight, so a larger message only takes more round trips.
const embeddedBufBytes = 1 << 20

// embeddedTarget is the gRPC target of the embedded server. The passthrough
// resolver hands it unchanged to the in-memory dialer, which ignores it.
const embeddedTarget = "passthrough:///modegrid-embedded"

// connect returns a client for --server, or for an embedded server in this
// process. The embedded server is reached through an in-memory listener
// (bufconn): the real gRPC stack, codecs and server interceptors, but no
// socket, so no other local user can call it while the CLI runs. The
// returned stop function releases everything.
func connect(addr string, opts ...client.Option) (*client.Client, func(), error) {
	if addr != "" {
		c, err := client.Dial(addr, opts...)
		if err != nil {
			return nil, nil, err
		}
		return c, func() { c.Close() }, nil
	}
	// The embedded server serves this process alone: its work bound is
	// the command's own deadline (callTimeout) rather than a shared
	// server's default, so a local job the estimate puts within it runs.
	srv, err := server.New(server.Config{MetricsListen: "off", MaxComputeSeconds: callTimeout.Seconds()})
	if err != nil {
		return nil, nil, fmt.Errorf("start embedded server: %w", err)
	}
	lis := bufconn.Listen(embeddedBufBytes)
	served := make(chan struct{})
	go func() {
		defer close(served)
		srv.Serve(lis)
	}()
	stopServer := func() {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		srv.Shutdown(ctx)
		<-served
	}
	dialer := func(ctx context.Context, _ string) (net.Conn, error) { return lis.DialContext(ctx) }
	opts = append(opts, client.WithDialOptions(grpc.WithContextDialer(dialer)))
	c, err := client.Dial(embeddedTarget, opts...)
	if err != nil {
		stopServer()
		return nil, nil, err
	}
	return c, func() {
		c.Close()
		stopServer()
	}, nil
}

// callTimeout bounds a command's calls; long jobs are still far inside it.
const callTimeout = 30 * time.Minute

// callContext bounds a command's calls by callTimeout.
func callContext() (context.Context, context.CancelFunc) {
	return context.WithTimeout(context.Background(), callTimeout)
}

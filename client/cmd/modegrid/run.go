package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"net"
	"strings"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/client"
	"github.com/materials-lab/modegrid/server"
)

// Exit codes.
const (
	exitOK          = 0
	exitOther       = 1
	exitUsage       = 2
	exitInvalid     = 3
	exitUnreachable = 4
)

// usageError is a command-line mistake (exit 2).
type usageError struct{ msg string }

func (e *usageError) Error() string { return e.msg }

func usagef(format string, args ...any) error { return &usageError{fmt.Sprintf(format, args...)} }

const usage = `usage: modegrid <command> [flags]

commands:
  modes    frequencies at q-points  (--model FILE --q "a,b,c;...")
  demo     the main job on the built-in example crystals

common flags:
  -m, --model FILE     model file (protobuf JSON of modegrid.v1.Crystal)
  --server ADDR        modegridd address; absent: an embedded server on loopback
  --format FORMAT      table | csv | json (default table)
`

func run(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		fmt.Fprint(stderr, usage)
		if len(args) == 0 {
			return exitUsage
		}
		return exitOK
	}
	var err error
	switch args[0] {
	case "modes":
		err = cmdModes(args[1:], stdout, stderr)
	case "demo":
		err = cmdDemo(args[1:], stdout, stderr)
	default:
		err = usagef("unknown command %q", args[0])
	}
	return report(err, stderr)
}

// report prints err as one clear message and returns the exit code.
func report(err error, stderr io.Writer) int {
	if err == nil {
		return exitOK
	}
	var ue *usageError
	if errors.As(err, &ue) {
		fmt.Fprintf(stderr, "modegrid: %s\n(run 'modegrid help' for usage)\n", ue.msg)
		return exitUsage
	}
	if errors.Is(err, flag.ErrHelp) {
		return exitOK
	}
	st, ok := status.FromError(err)
	if !ok {
		fmt.Fprintf(stderr, "modegrid: %v\n", err)
		return exitOther
	}
	switch st.Code() {
	case codes.InvalidArgument:
		fmt.Fprintln(stderr, "modegrid: the model or request is invalid:")
		printed := false
		for _, d := range st.Details() {
			if br, ok := d.(*errdetails.BadRequest); ok {
				for _, v := range br.GetFieldViolations() {
					fmt.Fprintf(stderr, "  %s: %s\n", v.GetField(), v.GetDescription())
					printed = true
				}
			}
		}
		if !printed {
			fmt.Fprintf(stderr, "  %s\n", st.Message())
		}
		return exitInvalid
	case codes.Unavailable:
		fmt.Fprintf(stderr, "modegrid: server unreachable: %s\n", st.Message())
		return exitUnreachable
	default:
		fmt.Fprintf(stderr, "modegrid: %s: %s\n", st.Code(), st.Message())
		return exitOther
	}
}

// common holds the flags every subcommand shares.
type common struct {
	model  string
	server string
	format string
}

func (c *common) register(fs *flag.FlagSet) {
	fs.StringVar(&c.model, "model", "", "model file (protobuf JSON)")
	fs.StringVar(&c.model, "m", "", "model file (shorthand)")
	fs.StringVar(&c.server, "server", "", "modegridd address (default: embedded server)")
	fs.StringVar(&c.format, "format", "table", "output format: table|csv|json")
}

func (c *common) check() error {
	switch c.format {
	case "table", "csv", "json":
	default:
		return usagef("--format must be table, csv or json, got %q", c.format)
	}
	return nil
}

// parse parses flags, turning flag errors into usage errors.
func parse(fs *flag.FlagSet, args []string) error {
	fs.SetOutput(io.Discard)
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return err
		}
		return usagef("%v", err)
	}
	if fs.NArg() > 0 {
		return usagef("unexpected argument %q", fs.Arg(0))
	}
	return nil
}

// connect returns a client for --server, or for an embedded server started
// on a loopback port. The returned stop function releases everything.
func connect(addr string) (*client.Client, func(), error) {
	if addr != "" {
		c, err := client.Dial(addr)
		if err != nil {
			return nil, nil, err
		}
		return c, func() { c.Close() }, nil
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return nil, nil, fmt.Errorf("start embedded server: %w", err)
	}
	gs := grpc.NewServer()
	server.Register(gs, server.NewService())
	go gs.Serve(lis)
	c, err := client.Dial(lis.Addr().String())
	if err != nil {
		gs.Stop()
		return nil, nil, err
	}
	return c, func() { c.Close(); gs.Stop() }, nil
}

// callContext bounds every call; long jobs are still far inside it.
func callContext() (context.Context, context.CancelFunc) {
	return context.WithTimeout(context.Background(), 30*time.Minute)
}

var _ = strings.TrimSpace

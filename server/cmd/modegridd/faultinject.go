package main

// Test-only fault injection for the adversarial suite
// (client/cmd/modegrid-load --adversarial), which drives this binary as a
// child process and so cannot install physics.SetFaultHook itself the way
// the in-process server tests do.
//
// It is a hidden switch, not a flag of the FlagSet: it is not listed by
// -h, has no MODEGRID_* environment variable (an environment that leaks
// into a deployment cannot turn it on), and is honoured only when given
// on the command line exactly as unsafeFaultFlag. With it, the engine's
// workers of a call whose metadata carries faultHeader panic with the
// header's value; calls without the header are untouched. The server logs
// a warning at start when it is on.

import (
	"context"
	"slices"

	"google.golang.org/grpc/metadata"

	"github.com/materials-lab/modegrid/physics"
)

const (
	// unsafeFaultFlag turns fault injection on. Never in production.
	unsafeFaultFlag = "--unsafe-fault-injection"
	// faultHeader is the request metadata marking a call whose engine
	// workers are to panic (the same header the server's tests use).
	faultHeader = "x-test-engine-fault"
)

// takeFaultFlag removes unsafeFaultFlag from args, saying whether it was
// there. Only arguments before a "--" terminator are considered.
func takeFaultFlag(args []string) (rest []string, on bool) {
	end := len(args)
	if i := slices.Index(args, "--"); i >= 0 {
		end = i
	}
	for i, a := range args[:end] {
		if a == unsafeFaultFlag {
			return append(slices.Clone(args[:i]), args[i+1:]...), true
		}
	}
	return args, false
}

// injectEngineFault is the fault hook: a worker of a computation whose
// incoming metadata carries faultHeader panics with the header's value.
func injectEngineFault(ctx context.Context) {
	md, _ := metadata.FromIncomingContext(ctx)
	if v := md.Get(faultHeader); len(v) > 0 {
		panic(v[0])
	}
}

// enableFaultInjection installs injectEngineFault; restore removes it.
func enableFaultInjection() (restore func()) {
	return physics.SetFaultHook(injectEngineFault)
}

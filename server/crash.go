package server

import (
	"fmt"
	"log/slog"
	"runtime/debug"
)

// crashGuard, deferred first in every goroutine the server starts outside
// a call handler (call handlers have the recovery interceptor), turns a
// panic into one JSON log line — "crash", with the goroutine's name, the
// panic and the stack — and then panics again, so the process still dies
// as Go makes it die (exit status 2, Go's own trace after the line). A
// server that panicked outside a call is in an unknown state: it stops,
// and its supervisor restarts it.
//
// Runtime fatal errors (out of memory, concurrent map writes, stack
// exhaustion) are not panics: Go runs no deferred function and prints only
// its plain-text trace; see modegridd's --crash-file for those.
func (s *Server) crashGuard(goroutine string) {
	if p := recover(); p != nil {
		LogCrash(s.cfg.Logger, goroutine, p, debug.Stack())
		panic(p)
	}
}

// LogCrash writes the one JSON line of a crash: the panic value and the
// stack of the goroutine that panicked.
func LogCrash(log *slog.Logger, goroutine string, p any, stack []byte) {
	log.Error("crash", "goroutine", goroutine, "panic", fmt.Sprint(p), "stack", string(stack))
}

// Command modegrid is the command-line client of the modegrid service. With
// --server it calls a running modegridd; without, it starts an embedded
// server in the same process and calls that over real gRPC through an
// in-memory connection (no port is opened).
//
// Exit codes: 0 success, 2 usage error, 3 invalid model or request,
// 4 server unreachable, 1 anything else.
package main

import (
	"os"
)

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

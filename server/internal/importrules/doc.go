// Package importrules has no Go API: its test enforces the import rules of
// the whole module (DEVELOPERS.md, "Architecture"), so that a package that
// imports across them fails `make test` instead of waiting for review.
//
// The rules, on the non-test imports of each package (paths relative to
// the module):
//
//   - physics/... imports only the standard library, gonum
//     (gonum.org/v1/gonum/...) and physics/... (its own sub-packages); its
//     tests too, and go.uber.org/goleak. Inside physics the arrows point
//     one way: the leaves (physics/internal/parallel, eigen, lattice,
//     mesh) ← the core (physics) ← physics/spectra ← physics/thermo ←
//     physics/thermo/qha, physics/transport, physics/fit and physics/scatter
//     (one layer), and the core ← physics/fcimport and physics/polar (in
//     spectra's layer); a
//     package (and its tests) imports only packages below it.
//     physics/internal/testmodels sits between the core and spectra and
//     is imported by tests only.
//   - proto/... imports only the standard library, grpc, protobuf and
//     proto/....
//   - server/... imports the standard library, libraries, physics/...,
//     proto/... and server/...; never client/....
//   - the client library (client and client/... outside client/cmd)
//     imports only the standard library, proto/..., grpc
//     (google.golang.org/grpc/...), protobuf (google.golang.org/protobuf/...)
//     and genproto's errdetails.
//   - client/cmd/modegrid (the CLI) may import the client library, proto/...,
//     server/... (to embed the server) and physics/... for constants only
//     (every physics.X it uses is a constant); it links neither the Redis
//     backend (server/cache/redis) nor the Redis client, directly or
//     through any dependency.
//   - other programs under client/cmd import only the client library,
//     proto/... and libraries.
//   - only server/cmd/modegridd imports server/cache/redis, and only
//     server/cache/redis imports the Redis client (github.com/redis/go-redis).
//   - nothing imports a package under a cmd/ directory (server/cmd/...,
//     client/cmd/...).
//   - every package lives under physics/, proto/, server/, client/ or
//     deploy/ (deploy/ holds tests only and has no import rule of its own).
//
// Tests outside physics/ may import more (the client's tests start a real
// server, for example); the Redis rules hold for their non-test code only.
//
// The package sits under server/internal only because the top level of
// the repository is fixed; it checks every package of the module.
package importrules

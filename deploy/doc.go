// Package deploy holds what it takes to run modegridd outside a developer's
// shell, and the tests that keep those files honest:
//
//   - Dockerfile (with /.dockerignore): a CPU-only binary built with the
//     lapack tag and the OpenBLAS runtime on a distroless non-root base;
//   - kubernetes/: Deployment, headless and ClusterIP Services, HPA, PDB,
//     ConfigMap and an optional shared Redis;
//   - prometheus/: scrape configuration, alert rules and their unit tests;
//   - OPERATIONS.md: how to run, watch and size the service.
//
// The package has no Go API. Its tests check the files statically (every
// manifest decoded strictly into the real Kubernetes types, the Dockerfile's
// stages, user and ports, promtool on the Prometheus files) and run the real
// parts on loopback: the binary the Dockerfile builds, redis-server,
// Prometheus, and three replicas behind the Go client with one of them
// killed mid-run.
package deploy

// Package client is the thin Go client of the modegrid gRPC service
// (modegrid.v1.ModegridService). It depends only on the generated protobuf
// package and gRPC.
//
// # Overview
//
// Dial returns a Client with defaults suited to a shared lab server:
//
//   - every call is retried on UNAVAILABLE through a gRPC service config
//     (all modegrid calls are idempotent), with exponential back-off;
//   - calls are spread round_robin over every address the resolver returns,
//     so "dns:///modegrid-headless.lab.svc:7420" balances over all replicas
//     of a headless Kubernetes Service; WithModelAffinity switches to gRPC's
//     ring_hash balancer keyed by model hash instead;
//   - client-side health checking drops a replica whose health service says
//     NOT_SERVING (for example while it drains);
//   - keepalive pings every DefaultKeepaliveTime, inside the server's
//     enforcement policy, so idle connections through NAT and load balancers
//     stay open and dead peers are noticed;
//   - message size limits of DefaultMaxMessageBytes both ways, the server's
//     limit;
//   - plaintext unless WithTLS, WithCAFile or WithClientCertificate is given;
//     WithToken adds a bearer token to every call.
//
// # Models by reference
//
// A model is sent inline the first time (ModelSource.crystal). Every response
// carries the server's model hash; the Client remembers it and sends later
// requests for the same model as a reference (ModelSource.model_hash). When a
// server answers NOT_FOUND (it evicted the model, or another replica
// answered), the Client resends the model inline, once, transparently. The
// caller's request messages are never modified.
//
// # Streams
//
// ComputeModes is a server stream. Modes collects it into one response,
// calling an optional progress function after each chunk; StreamModes hands
// over chunks one at a time for results too large to hold. A stream broken
// by UNAVAILABLE part-way is reopened and resumes after the last point
// received (results come in q order and are deterministic).
//
// # Errors
//
// Errors are gRPC status errors. FieldViolations lists the bad fields of an
// INVALID_ARGUMENT; IsUnreachable tells a server that cannot be reached from
// a server that refused the request.
package client

// Package client is the thin Go client of the modegrid gRPC service
// (modegrid.v1.ModegridService). It depends only on the generated protobuf
// package and gRPC.
//
// # Overview
//
// Dial returns a Client with defaults suited to a shared lab server:
//
//   - a call made while no server is ready waits for one (see "Waiting
//     for a server") instead of failing at once;
//   - every call is retried on UNAVAILABLE through a gRPC service config,
//     with exponential back-off (see "Retries");
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
// # Waiting for a server
//
// Calls are wait-for-ready. When no replica is ready (a lone server
// restarting, every replica down, a name that does not resolve yet), a call
// does not fail: it waits while gRPC reconnects in the background with
// exponential back-off and jitter, DefaultConnectBaseDelay (200 ms) after
// the first failed connection attempt, growing by DefaultConnectMultiplier
// (1.6) up to DefaultConnectMaxDelay (5 s), each wait spread by
// ±DefaultConnectJitter (20 %). A waiting call costs nothing on the
// network: it makes one attempt, which is sent when a connection is ready.
//
// The wait of each attempt ends at the caller's deadline (the call fails
// with DEADLINE_EXCEEDED) or after the ready wait, DefaultReadyWait (20 s),
// whichever comes first (the call fails with UNAVAILABLE). A call whose
// context has no deadline therefore waits at most DefaultReadyWait for a
// server; once a server has its request the call lasts as long as the
// computation (the server bounds its queue with --queue-timeout and its work
// with its caps; keepalive notices a server that died). IsUnreachable
// recognises both errors of a call that never reached a server. Errors name
// the last connection failure ("connection refused", a TLS handshake error):
// a misconfigured client also waits, and says why when it gives up.
//
// WithReadyWait changes the ready wait, WithConnectBackoff the reconnection
// back-off, and WithFailFast turns waiting off (a call made while no server
// is ready fails at once with UNAVAILABLE, as tools that count refusals
// want).
//
// # Retries
//
// Every modegrid call is a pure computation on its request: running it twice
// changes nothing on the server but its caches, so every method is retried.
// A call that fails with UNAVAILABLE (a replica that stopped or broke the
// connection before answering) is retried by gRPC's retry policy, up to
// DefaultMaxAttempts attempts in all (WithMaxAttempts), with a random
// back-off of up to 0.1 s doubling to 2 s; the retry waits for a ready
// server like any attempt, on another replica when there is one. Once the
// server has begun to answer, gRPC no longer retries a call (it is
// committed); the Client then sends it again itself, at most 3 times (a
// modes stream resumes after the points it delivered). WithMaxAttempts(1)
// turns off every retry, the Client's resends included. No other code is
// retried: INVALID_ARGUMENT, RESOURCE_EXHAUSTED (a busy server: retrying
// would add load) and the rest are returned as they came.
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
// # Big models
//
// A request whose inline model makes it larger than one message
// (WithMaxMessageBytes, or WithUploadThreshold) cannot go inline: the
// Client first sends the model through the UploadModel stream (its
// protobuf binary in 32 KiB chunks, with its SHA-256), then the request by
// the hash the upload answers — the hash an inline request would get. The
// hash is remembered like any other, so the model is uploaded once; a
// NOT_FOUND later uploads it again, once. A server whose message cap is
// below the Client's refuses the inline request (RESOURCE_EXHAUSTED); the
// Client then uploads the model too. UploadModel does the upload
// explicitly, to send a model ahead or to learn its hash.
//
// A replica holds the models uploaded to it. Without WithModelAffinity,
// uploads and the calls that name an uploaded model therefore go on a
// second, pinned connection (gRPC's pick_first over the same target, the
// addresses shuffled), which keeps them on one replica while it serves;
// other calls stay round_robin. With affinity, the upload carries the
// model's hash like every call once it is known: the first upload of a
// model may land on another replica, and the first reference then gets
// NOT_FOUND and uploads the model again to the replica its hash routes to.
//
// An uploaded model that is invalid is refused by the upload:
// INVALID_ARGUMENT naming the fields as an inline request would
// ("model.crystal.sites[2].mass_amu"), also for Check, which for an inline
// model would answer Valid false instead.
//
// # Streams
//
// ComputeModes is a server stream. Modes collects it into one response,
// calling an optional progress function after each chunk; StreamModes hands
// over chunks one at a time for results too large to hold. A stream broken
// by UNAVAILABLE part-way is reopened (up to 3 times, each waiting for a
// ready server) and resumes after the last point received (results come in
// q order and are deterministic).
//
// # Errors
//
// Errors are gRPC status errors (status.Code and status.FromError work on
// them). FieldViolations lists the bad fields of an INVALID_ARGUMENT;
// IsUnreachable tells a server that cannot be reached (UNAVAILABLE, or a
// deadline that ran out while waiting for a server) from a server that
// refused the request.
package client

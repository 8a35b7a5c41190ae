package server

import (
	"bufio"
	"bytes"
	"context"
	"crypto/sha256"
	"crypto/subtle"
	"crypto/tls"
	"crypto/x509"
	"fmt"
	"os"
	"strings"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/peer"
	"google.golang.org/grpc/status"
)

// tlsCredentials loads the server certificate and, for mutual TLS, the
// client CA. TLS 1.2 is the minimum.
//
// With a client CA the handshake requires a client certificate and proof
// of its private key, but the chain is verified per call by
// clientCerts.verify, not in the handshake: a certificate that is expired,
// not yet valid, not for client authentication or signed by another CA
// then gets UNAUTHENTICATED naming the reason, instead of a TLS alert the
// client reports as an unreachable server (UNAVAILABLE). Either way no
// handler runs.
func tlsCredentials(certFile, keyFile, clientCAFile string) (credentials.TransportCredentials, *clientCerts, error) {
	cert, err := tls.LoadX509KeyPair(certFile, keyFile)
	if err != nil {
		return nil, nil, fmt.Errorf("tls-cert/tls-key: %w", err)
	}
	cfg := &tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12}
	var cc *clientCerts
	if clientCAFile != "" {
		pem, err := os.ReadFile(clientCAFile)
		if err != nil {
			return nil, nil, fmt.Errorf("client-ca: %w", err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pem) {
			return nil, nil, fmt.Errorf("client-ca: %s holds no PEM certificate", clientCAFile)
		}
		// The CA is not advertised in the handshake (tls.Config.ClientCAs):
		// a client whose certificate another CA signed would then send
		// none, and be refused with an alert instead of a reason.
		cfg.ClientAuth = tls.RequireAnyClientCert
		cc = &clientCerts{roots: pool, now: time.Now}
	}
	return credentials.NewTLS(cfg), cc, nil
}

// clientCerts verifies the client certificate of each call against the
// client CA. The nil *clientCerts (no mutual TLS) accepts every call.
type clientCerts struct {
	roots *x509.CertPool
	now   func() time.Time // the clock certificates are checked at
}

// verify checks the peer's certificate chain of the call: signed by the
// client CA, valid now, usable for client authentication. Every call is
// checked, so a certificate that expires during a long-lived connection
// stops being accepted when it expires.
func (cc *clientCerts) verify(ctx context.Context) error {
	if cc == nil {
		return nil
	}
	p, ok := peer.FromContext(ctx)
	if !ok {
		return status.Error(codes.Unauthenticated, "client certificate required (mutual TLS)")
	}
	info, ok := p.AuthInfo.(credentials.TLSInfo)
	if !ok || len(info.State.PeerCertificates) == 0 {
		return status.Error(codes.Unauthenticated, "client certificate required (mutual TLS)")
	}
	certs := info.State.PeerCertificates
	inter := x509.NewCertPool()
	for _, c := range certs[1:] {
		inter.AddCert(c)
	}
	_, err := certs[0].Verify(x509.VerifyOptions{
		Roots: cc.roots, Intermediates: inter, CurrentTime: cc.now(),
		KeyUsages: []x509.ExtKeyUsage{x509.ExtKeyUsageClientAuth},
	})
	if err != nil {
		return status.Errorf(codes.Unauthenticated, "client certificate %q not accepted: %v", certs[0].Subject.CommonName, err)
	}
	return nil
}

// tokenSet holds the SHA-256 digests of the accepted bearer tokens. Digests
// have one length, so comparing them in constant time reveals neither a
// token nor its length.
type tokenSet struct {
	digests [][sha256.Size]byte
}

// loadTokens reads one token a line; blank lines and # comments are
// skipped. An empty file is an error: it would lock everyone out.
func loadTokens(path string) (*tokenSet, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("token-file: %w", err)
	}
	ts := &tokenSet{}
	sc := bufio.NewScanner(bytes.NewReader(b))
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		ts.digests = append(ts.digests, sha256Sum(line))
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("token-file: %w", err)
	}
	if len(ts.digests) == 0 {
		return nil, fmt.Errorf("token-file: %s holds no token", path)
	}
	return ts, nil
}

// valid reports whether token is one of the set. Every digest is compared,
// whatever matches, so the time does not depend on which one matched.
func (ts *tokenSet) valid(token string) bool {
	d := sha256Sum(token)
	ok := 0
	for i := range ts.digests {
		ok |= subtle.ConstantTimeCompare(d[:], ts.digests[i][:])
	}
	return ok == 1
}

// healthPrefix is the method prefix of the standard health service,
// reachable without a token so probes need no secret.
const healthPrefix = "/grpc.health.v1.Health/"

// authorize checks the bearer token of a call to method.
func (ts *tokenSet) authorize(ctx context.Context, method string) error {
	if ts == nil || strings.HasPrefix(method, healthPrefix) {
		return nil
	}
	md, _ := metadata.FromIncomingContext(ctx)
	vals := md.Get("authorization")
	if len(vals) == 0 {
		return status.Error(codes.Unauthenticated, `missing "authorization: Bearer <token>" metadata`)
	}
	tok, found := strings.CutPrefix(vals[0], "Bearer ")
	if !found {
		tok, found = strings.CutPrefix(vals[0], "bearer ")
	}
	if !found || !ts.valid(strings.TrimSpace(tok)) {
		return status.Error(codes.Unauthenticated, "invalid bearer token")
	}
	return nil
}

func sha256Sum(s string) [sha256.Size]byte { return sha256.Sum256([]byte(s)) }

package server

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"
)

// pki is a throw-away certificate authority with certificates it issued.
type pki struct {
	dir    string
	caCert *x509.Certificate
	caKey  *ecdsa.PrivateKey
	serial int64
}

func newPKI(t *testing.T, dir, name string) *pki {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber:          big.NewInt(1),
		Subject:               pkix.Name{CommonName: name},
		NotBefore:             time.Now().Add(-time.Hour),
		NotAfter:              time.Now().Add(time.Hour),
		IsCA:                  true,
		KeyUsage:              x509.KeyUsageCertSign | x509.KeyUsageDigitalSignature,
		BasicConstraintsValid: true,
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	cert, err := x509.ParseCertificate(der)
	if err != nil {
		t.Fatal(err)
	}
	p := &pki{dir: dir, caCert: cert, caKey: key, serial: 1}
	writePEM(t, filepath.Join(dir, name+"-ca.pem"), "CERTIFICATE", der)
	return p
}

func (p *pki) caFile(name string) string { return filepath.Join(p.dir, name+"-ca.pem") }

func writePEM(t *testing.T, path, typ string, der []byte) {
	t.Helper()
	if err := os.WriteFile(path, pem.EncodeToMemory(&pem.Block{Type: typ, Bytes: der}), 0o600); err != nil {
		t.Fatal(err)
	}
}

// issue writes a leaf certificate and key for name and returns their
// paths; server certificates are valid for 127.0.0.1.
func (p *pki) issue(t *testing.T, name string, server bool) (certFile, keyFile string) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	p.serial++
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(p.serial),
		Subject:      pkix.Name{CommonName: name},
		NotBefore:    time.Now().Add(-time.Hour),
		NotAfter:     time.Now().Add(time.Hour),
		KeyUsage:     x509.KeyUsageDigitalSignature,
		ExtKeyUsage:  []x509.ExtKeyUsage{x509.ExtKeyUsageClientAuth},
	}
	if server {
		tmpl.ExtKeyUsage = []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}
		tmpl.IPAddresses = []net.IP{net.ParseIP("127.0.0.1")}
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, p.caCert, &key.PublicKey, p.caKey)
	if err != nil {
		t.Fatal(err)
	}
	kder, err := x509.MarshalECPrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	certFile, keyFile = filepath.Join(p.dir, name+".pem"), filepath.Join(p.dir, name+"-key.pem")
	writePEM(t, certFile, "CERTIFICATE", der)
	writePEM(t, keyFile, "EC PRIVATE KEY", kder)
	return certFile, keyFile
}

func (p *pki) pool() *x509.CertPool {
	pool := x509.NewCertPool()
	pool.AddCert(p.caCert)
	return pool
}

// call makes one modes call and returns its code.
func call(t *testing.T, ts *testServer, md ...string) codes.Code {
	t.Helper()
	ctx := testContext(t)
	if len(md) > 0 {
		ctx = metadata.AppendToOutgoingContext(ctx, md...)
	}
	_, err := collectModes(ctx, ts.api, modesReq(t))
	return status.Code(err)
}

func TestTLS(t *testing.T) {
	dir := t.TempDir()
	ca := newPKI(t, dir, "lab")
	other := newPKI(t, dir, "elsewhere")
	srvCert, srvKey := ca.issue(t, "modegridd", true)
	cliCert, cliKey := ca.issue(t, "client", false)
	strangerCert, strangerKey := other.issue(t, "stranger", false)
	clientTLS := func(certFile, keyFile string) grpc.DialOption {
		cfg := &tls.Config{RootCAs: ca.pool(), MinVersion: tls.VersionTLS12}
		if certFile != "" {
			c, err := tls.LoadX509KeyPair(certFile, keyFile)
			if err != nil {
				t.Fatal(err)
			}
			cfg.Certificates = []tls.Certificate{c}
		}
		return grpc.WithTransportCredentials(credentials.NewTLS(cfg))
	}
	tests := []struct {
		name     string
		clientCA string
		dial     grpc.DialOption
		want     codes.Code
	}{
		{name: "tls", dial: clientTLS("", ""), want: codes.OK},
		{name: "plaintext client to tls server", dial: grpc.WithTransportCredentials(insecure.NewCredentials()), want: codes.Unavailable},
		{name: "mtls with a client certificate", clientCA: ca.caFile("lab"), dial: clientTLS(cliCert, cliKey), want: codes.OK},
		{name: "mtls without a client certificate", clientCA: ca.caFile("lab"), dial: clientTLS("", ""), want: codes.Unavailable},
		// The handshake needs a certificate; its chain is checked per call
		// (UNAUTHENTICATED with the reason; fault_test.go checks the rest).
		{name: "mtls with a certificate of another CA", clientCA: ca.caFile("lab"), dial: clientTLS(strangerCert, strangerKey), want: codes.Unauthenticated},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ts := startServer(t, Config{TLSCertFile: srvCert, TLSKeyFile: srvKey, ClientCAFile: tt.clientCA},
				serverOpts{dialOpts: []grpc.DialOption{tt.dial}})
			if got := call(t, ts); got != tt.want {
				t.Errorf("got %v; want %v", got, tt.want)
			}
		})
	}
}

func TestTLSConfigErrors(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.pem")
	if err := os.WriteFile(bad, []byte("not a certificate"), 0o600); err != nil {
		t.Fatal(err)
	}
	ca := newPKI(t, dir, "lab")
	cert, key := ca.issue(t, "modegridd", true)
	tests := []struct {
		name string
		cfg  Config
	}{
		{name: "cert without key", cfg: Config{TLSCertFile: cert}},
		{name: "client CA without TLS", cfg: Config{ClientCAFile: ca.caFile("lab")}},
		{name: "unreadable cert", cfg: Config{TLSCertFile: bad, TLSKeyFile: key}},
		{name: "client CA not PEM", cfg: Config{TLSCertFile: cert, TLSKeyFile: key, ClientCAFile: bad}},
		{name: "missing token file", cfg: Config{TokenFile: filepath.Join(dir, "absent")}},
		{name: "empty token file", cfg: Config{TokenFile: bad + ".empty"}},
	}
	if err := os.WriteFile(bad+".empty", []byte("# no tokens\n\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if _, err := New(tt.cfg); err == nil {
				t.Error("New accepted the configuration; want an error")
			}
		})
	}
}

func TestBearerTokens(t *testing.T) {
	file := filepath.Join(t.TempDir(), "tokens")
	if err := os.WriteFile(file, []byte("# lab tokens\nalpha-0123456789\n\n  beta-9876543210  \n"), 0o600); err != nil {
		t.Fatal(err)
	}
	ts := startServer(t, Config{TokenFile: file})
	tests := []struct {
		name string
		md   []string
		want codes.Code
	}{
		{name: "no token", want: codes.Unauthenticated},
		{name: "wrong token", md: []string{"authorization", "Bearer alpha-012345678"}, want: codes.Unauthenticated},
		{name: "not a bearer token", md: []string{"authorization", "Basic alpha-0123456789"}, want: codes.Unauthenticated},
		{name: "first token", md: []string{"authorization", "Bearer alpha-0123456789"}, want: codes.OK},
		{name: "second token, trimmed", md: []string{"authorization", "Bearer beta-9876543210"}, want: codes.OK},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := call(t, ts, tt.md...); got != tt.want {
				t.Errorf("got %v; want %v", got, tt.want)
			}
		})
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_auth_failures_total", nil); n != 3 {
		t.Errorf("auth failures %v; want 3", n)
	}
	// Health needs no token.
	resp, err := healthpb.NewHealthClient(ts.conn).Check(testContext(t), &healthpb.HealthCheckRequest{})
	if err != nil || resp.GetStatus() != healthpb.HealthCheckResponse_SERVING {
		t.Errorf("health without a token: %v, %v; want SERVING", resp.GetStatus(), err)
	}
}

func TestTokenSetConstantTime(t *testing.T) {
	ts := &tokenSet{}
	for _, tok := range []string{"a", "bb", "a-much-longer-token"} {
		ts.digests = append(ts.digests, sha256Sum(tok))
	}
	tests := []struct {
		name  string
		token string
		want  bool
	}{
		{name: "first", token: "a", want: true},
		{name: "last", token: "a-much-longer-token", want: true},
		{name: "prefix", token: "a-much", want: false},
		{name: "empty", token: "", want: false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := ts.valid(tt.token); got != tt.want {
				t.Errorf("valid(%q) = %v; want %v", tt.token, got, tt.want)
			}
		})
	}
}

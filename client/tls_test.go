package client_test

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
	"github.com/materials-lab/modegrid/server"
)

// pki is a throw-away certificate authority with a server certificate for
// 127.0.0.1 and a client certificate, written as PEM files.
type pki struct {
	caFile, serverCert, serverKey, clientCert, clientKey string
}

func newPKI(t *testing.T) pki {
	t.Helper()
	dir := t.TempDir()
	caKey, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	caTmpl := &x509.Certificate{
		SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "modegrid test CA"},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour),
		IsCA: true, BasicConstraintsValid: true, KeyUsage: x509.KeyUsageCertSign,
	}
	caDER, err := x509.CreateCertificate(rand.Reader, caTmpl, caTmpl, &caKey.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	ca, err := x509.ParseCertificate(caDER)
	if err != nil {
		t.Fatal(err)
	}
	write := func(name, typ string, der []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, pem.EncodeToMemory(&pem.Block{Type: typ, Bytes: der}), 0o600); err != nil {
			t.Fatal(err)
		}
		return p
	}
	leaf := func(name string, serial int64, usage x509.ExtKeyUsage) (string, string) {
		key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
		if err != nil {
			t.Fatal(err)
		}
		tmpl := &x509.Certificate{
			SerialNumber: big.NewInt(serial), Subject: pkix.Name{CommonName: name},
			NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour),
			KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{usage},
			IPAddresses: []net.IP{net.ParseIP("127.0.0.1")},
		}
		der, err := x509.CreateCertificate(rand.Reader, tmpl, ca, &key.PublicKey, caKey)
		if err != nil {
			t.Fatal(err)
		}
		kder, err := x509.MarshalECPrivateKey(key)
		if err != nil {
			t.Fatal(err)
		}
		return write(name+".pem", "CERTIFICATE", der), write(name+"-key.pem", "EC PRIVATE KEY", kder)
	}
	p := pki{caFile: write("ca.pem", "CERTIFICATE", caDER)}
	p.serverCert, p.serverKey = leaf("server", 2, x509.ExtKeyUsageServerAuth)
	p.clientCert, p.clientKey = leaf("client", 3, x509.ExtKeyUsageClientAuth)
	return p
}

// TestSecurity: the client's TLS, mutual-TLS and token options against the
// real server configured with a certificate, a client CA and a token file.
func TestSecurity(t *testing.T) {
	p := newPKI(t)
	tokens := filepath.Join(t.TempDir(), "tokens")
	if err := os.WriteFile(tokens, []byte("# lab tokens\ngood-token\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	srv, err := server.New(server.Config{
		MetricsListen: "off", TLSCertFile: p.serverCert, TLSKeyFile: p.serverKey,
		ClientCAFile: p.caFile, TokenFile: tokens,
	})
	if err != nil {
		t.Fatal(err)
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	go srv.Serve(lis)
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		srv.Shutdown(ctx)
	})
	addr := lis.Addr().String()
	mtls := []client.Option{client.WithCAFile(p.caFile), client.WithClientCertificate(p.clientCert, p.clientKey)}
	tests := []struct {
		name string
		opts []client.Option
		want codes.Code
	}{
		{name: "mutual TLS and token", opts: append(mtls, client.WithToken("good-token")), want: codes.OK},
		{name: "wrong token", opts: append(mtls, client.WithToken("bad-token")), want: codes.Unauthenticated},
		{name: "no token", opts: mtls, want: codes.Unauthenticated},
		{name: "no client certificate", opts: []client.Option{client.WithCAFile(p.caFile), client.WithToken("good-token")}, want: codes.Unavailable},
		{name: "server not trusted", opts: []client.Option{client.WithTLS(nil), client.WithToken("good-token")}, want: codes.Unavailable},
		{name: "plaintext", opts: []client.Option{client.WithToken("good-token")}, want: codes.Unavailable},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			opts := append(tc.opts, client.WithMaxAttempts(1))
			if tc.want == codes.Unavailable {
				// A failed handshake leaves no ready server: the call
				// waits for one, here briefly, then gives up.
				opts = append(opts, client.WithReadyWait(500*time.Millisecond))
			}
			c := dial(t, addr, opts...)
			_, err := c.Modes(testContext(t), &modegridv1.ComputeModesRequest{
				Model: client.Inline(example(t, "chain")), Qpoints: client.QList([3]float64{0.5, 0, 0}),
			})
			if got := status.Code(err); got != tc.want {
				t.Errorf("got %v (%v); want %v", got, err, tc.want)
			}
		})
	}
}

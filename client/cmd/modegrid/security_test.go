package main

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
	"strings"
	"testing"
	"time"

	"github.com/materials-lab/modegrid/server"
)

// writeCerts writes a throw-away CA and server and client certificates for
// 127.0.0.1 as PEM files into dir and returns their paths.
func writeCerts(t *testing.T, dir string) (ca, srvCert, srvKey, cliCert, cliKey string) {
	t.Helper()
	now := time.Now()
	caKey, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	caTmpl := &x509.Certificate{SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "test CA"},
		NotBefore: now.Add(-time.Hour), NotAfter: now.Add(time.Hour), IsCA: true, BasicConstraintsValid: true,
		KeyUsage: x509.KeyUsageCertSign}
	caDER, err := x509.CreateCertificate(rand.Reader, caTmpl, caTmpl, &caKey.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	caCert, _ := x509.ParseCertificate(caDER)
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
		der, err := x509.CreateCertificate(rand.Reader, &x509.Certificate{SerialNumber: big.NewInt(serial),
			Subject: pkix.Name{CommonName: name}, NotBefore: now.Add(-time.Hour), NotAfter: now.Add(time.Hour),
			KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{usage},
			IPAddresses: []net.IP{net.ParseIP("127.0.0.1")}}, caCert, &key.PublicKey, caKey)
		if err != nil {
			t.Fatal(err)
		}
		kder, _ := x509.MarshalECPrivateKey(key)
		return write(name+".pem", "CERTIFICATE", der), write(name+"-key.pem", "EC PRIVATE KEY", kder)
	}
	ca = write("ca.pem", "CERTIFICATE", caDER)
	srvCert, srvKey = leaf("server", 2, x509.ExtKeyUsageServerAuth)
	cliCert, cliKey = leaf("client", 3, x509.ExtKeyUsageClientAuth)
	return
}

// TestSecurityFlags: --ca, --cert/--key and --token (or $MODEGRID_TOKEN)
// against a real modegrid server requiring mutual TLS and a token.
func TestSecurityFlags(t *testing.T) {
	dir := t.TempDir()
	ca, sc, sk, cc, ck := writeCerts(t, dir)
	tokens := filepath.Join(dir, "tokens")
	if err := os.WriteFile(tokens, []byte("s3cret\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	srv, err := server.New(server.Config{MetricsListen: "off", TLSCertFile: sc, TLSKeyFile: sk, ClientCAFile: ca, TokenFile: tokens})
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
	base := []string{"modes", "--server", lis.Addr().String(), "-m", example("chain"), "--q", "0.5", "--ca", ca, "--cert", cc, "--key", ck}
	tests := []struct {
		name       string
		args       []string
		env        string
		want       int
		wantStderr string
	}{
		{name: "token flag", args: append(base[:len(base):len(base)], "--token", "s3cret"), want: exitOK},
		{name: "token from environment", args: base, env: "s3cret", want: exitOK},
		{name: "wrong token", args: append(base[:len(base):len(base)], "--token", "guess"), want: exitOther, wantStderr: "refused the credentials"},
		{name: "cert without key", args: []string{"modes", "--server", lis.Addr().String(), "-m", example("chain"), "--q", "0.5", "--cert", cc}, want: exitUsage, wantStderr: "--cert and --key go together"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Setenv("MODEGRID_TOKEN", tc.env)
			code, _, stderr := runCLI(t, tc.args...)
			if code != tc.want {
				t.Fatalf("exit %d; want %d: %s", code, tc.want, stderr)
			}
			if !strings.Contains(stderr, tc.wantStderr) {
				t.Errorf("stderr %q lacks %q", stderr, tc.wantStderr)
			}
		})
	}
}

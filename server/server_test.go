package server

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"math/big"
	"net"
	"net/http"
	"net/http/cookiejar"
	"net/url"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"longwave/server/intake"
	"longwave/server/store"
)

func TestConfigDefaults(t *testing.T) {
	var c Config
	c.fill()
	if c.Addr != "127.0.0.1:8080" {
		t.Errorf("default Addr %q, want loopback 127.0.0.1:8080", c.Addr)
	}
	if c.UploadLimit != DefaultUploadLimit || c.ReadHeaderTimeout != DefaultReadHeaderTimeout || c.SessionTTL != DefaultSessionTTL {
		t.Errorf("defaults not filled: %+v", c)
	}
	st, err := store.Open(filepath.Join(t.TempDir(), "x.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if _, err := New(Config{TLSCert: "a.pem"}, st, intake.New(st)); err == nil {
		t.Error("New accepted a certificate without a key")
	}
	if _, err := New(Config{}, nil, nil); err == nil {
		t.Error("New accepted no store")
	}
}

// selfSigned writes a certificate and key for 127.0.0.1 and returns their
// paths and a pool that trusts the certificate.
func selfSigned(t *testing.T) (cert, key string, pool *x509.CertPool) {
	t.Helper()
	k, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tpl := &x509.Certificate{SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "longwave test"},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour),
		IPAddresses: []net.IP{net.ParseIP("127.0.0.1")}, KeyUsage: x509.KeyUsageDigitalSignature,
		ExtKeyUsage: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}}
	der, err := x509.CreateCertificate(rand.Reader, tpl, tpl, &k.PublicKey, k)
	if err != nil {
		t.Fatal(err)
	}
	kb, err := x509.MarshalECPrivateKey(k)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	cert, key = filepath.Join(dir, "cert.pem"), filepath.Join(dir, "key.pem")
	os.WriteFile(cert, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o600)
	os.WriteFile(key, pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: kb}), 0o600)
	c, _ := x509.ParseCertificate(der)
	pool = x509.NewCertPool()
	pool.AddCert(c)
	return cert, key, pool
}

// TestRunTLSAndShutdown runs the real service on 127.0.0.1:0 with TLS:
// sign-in gives a Secure cookie and HSTS, and cancelling the context shuts
// the service down cleanly.
func TestRunTLSAndShutdown(t *testing.T) {
	cert, key, pool := selfSigned(t)
	st, err := store.Open(filepath.Join(t.TempDir(), "x.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if _, err := st.CreateUser(context.Background(), adminName, store.RoleAdmin, testPassword); err != nil {
		t.Fatal(err)
	}
	srv, err := New(Config{Addr: "127.0.0.1:0", TLSCert: cert, TLSKey: key}, st, intake.New(st), WithLogger(discardLogger()))
	if err != nil {
		t.Fatal(err)
	}
	if err := srv.Listen(); err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(srv.URL(), "https://127.0.0.1:") {
		t.Fatalf("URL %q", srv.URL())
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- srv.Run(ctx) }()

	jar, _ := cookiejar.New(nil)
	hc := &http.Client{Jar: jar, Timeout: 20 * time.Second,
		Transport:     &http.Transport{TLSClientConfig: &tls.Config{RootCAs: pool}},
		CheckRedirect: func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse }}
	c := &client{t: t, base: srv.URL(), c: hc}
	status, body, _ := c.get("/signin")
	m := csrfFieldRE.FindStringSubmatch(body)
	if status != http.StatusOK || m == nil {
		t.Fatalf("GET /signin over TLS: %d", status)
	}
	_, _, res := c.postForm("/signin", url.Values{"csrf": {m[1]}, "name": {adminName}, "password": {testPassword}})
	var secure bool
	for _, ck := range res.Cookies() {
		if ck.Name == sessionCookie {
			secure = ck.Secure
		}
	}
	if res.StatusCode != http.StatusSeeOther || !secure {
		t.Errorf("sign-in over TLS: status %d, Secure cookie %v", res.StatusCode, secure)
	}
	if res.Header.Get("Strict-Transport-Security") == "" {
		t.Error("no Strict-Transport-Security under TLS")
	}
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Errorf("Run after cancel: %v", err)
		}
	case <-time.After(20 * time.Second):
		t.Fatal("Run did not return after its context ended")
	}
	if _, err := net.DialTimeout("tcp", srv.Addr().String(), time.Second); err == nil {
		t.Error("the port still accepts connections after shutdown")
	}
}

package servertest

import (
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
)

// Certs are PEM files for TLS tests: a CA, a server certificate for 127.0.0.1 and localhost signed by it, a
// client certificate signed by it, and a client certificate from another CA that the daemon must refuse.
type Certs struct {
	CA                        string
	ServerCert, ServerKey     string
	ClientCert, ClientKey     string
	StrangerCert, StrangerKey string
	dir                       string
}

// NewCerts makes fresh certificates in a temporary directory (keys readable by the owner only).
func NewCerts(t testing.TB) *Certs {
	t.Helper()
	c := &Certs{dir: t.TempDir()}
	caCert, caKey := newCA(t, "goniod test CA")
	c.CA = c.write(t, "ca.pem", "CERTIFICATE", caCert.Raw)
	c.ServerCert, c.ServerKey = c.leaf(t, "server", caCert, caKey, x509.ExtKeyUsageServerAuth)
	c.ClientCert, c.ClientKey = c.leaf(t, "client", caCert, caKey, x509.ExtKeyUsageClientAuth)
	otherCert, otherKey := newCA(t, "some other CA")
	c.StrangerCert, c.StrangerKey = c.leaf(t, "stranger", otherCert, otherKey, x509.ExtKeyUsageClientAuth)
	return c
}

func newCA(t testing.TB, name string) (*x509.Certificate, *ecdsa.PrivateKey) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: name},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(24 * time.Hour),
		IsCA: true, BasicConstraintsValid: true, KeyUsage: x509.KeyUsageCertSign}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	cert, err := x509.ParseCertificate(der)
	if err != nil {
		t.Fatal(err)
	}
	return cert, key
}

// leaf makes a certificate named name signed by the CA and writes it and its key.
func (c *Certs) leaf(t testing.TB, name string, ca *x509.Certificate, caKey *ecdsa.PrivateKey, usage x509.ExtKeyUsage) (certFile, keyFile string) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	serial, err := rand.Int(rand.Reader, big.NewInt(1<<62))
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{SerialNumber: serial, Subject: pkix.Name{CommonName: name},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(24 * time.Hour),
		KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{usage},
		DNSNames: []string{"localhost"}, IPAddresses: []net.IP{net.IPv4(127, 0, 0, 1), net.IPv6loopback}}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, ca, &key.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	kder, err := x509.MarshalECPrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	return c.write(t, name+".pem", "CERTIFICATE", der), c.write(t, name+"-key.pem", "EC PRIVATE KEY", kder)
}

func (c *Certs) write(t testing.TB, name, kind string, der []byte) string {
	t.Helper()
	path := filepath.Join(c.dir, name)
	if err := os.WriteFile(path, pem.EncodeToMemory(&pem.Block{Type: kind, Bytes: der}), 0o600); err != nil {
		t.Fatal(err)
	}
	return path
}

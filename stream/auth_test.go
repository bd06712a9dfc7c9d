package stream_test

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
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/jwt/v2"
	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nkeys"
	"github.com/rs/zerolog"

	"github.com/headroom-dev/headroom/stream"
)

// authCase is one way of authenticating, with the server set-up that
// demands it, dials that must get in, dials that must be refused, and
// the secrets that must appear in no log line and no error.
type authCase struct {
	name    string
	server  func(*server.Options)
	good    []stream.Dial // URL empty: the server's URL is filled in
	refused []refusal
	secrets []string
}

type refusal struct {
	name string
	dial stream.Dial
	want string // part of the error, lower case, that tells why
}

// authViolation is the server's refusal of bad or missing credentials.
const authViolation = "authorization violation"

// TestDialAuth connects to a real embedded server with each method, with
// the right secret, a wrong one and none, and checks that no secret shows
// in the errors, the dial's log or the server's log.
func TestDialAuth(t *testing.T) {
	dir := t.TempDir()
	cases := []authCase{
		userPasswordCase(),
		tokenCase(),
		nkeyCase(t, dir),
		credsCase(t, dir),
		tlsCase(t, dir),
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var dialLog, serverLog syncBuffer
			emb, err := stream.StartEmbedded(context.Background(), stream.EmbeddedConfig{
				Port: -1, Log: zerolog.New(&serverLog).Level(zerolog.DebugLevel), ExtraOpts: c.server})
			if err != nil {
				t.Fatal(err)
			}
			defer emb.Shutdown()
			ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
			defer cancel()
			dial := func(d stream.Dial) stream.Dial {
				if d.URL == "" {
					d.URL = emb.URL()
				} else {
					d.URL = strings.ReplaceAll(d.URL, "HOSTPORT", strings.TrimPrefix(emb.URL(), "nats://"))
				}
				d.Log = zerolog.New(&dialLog).Level(zerolog.DebugLevel)
				return d
			}
			var errs []string
			for i, d := range c.good {
				nc, err := dial(d).Connect(ctx)
				if err != nil {
					t.Fatalf("good dial %d (%v) refused: %v", i, d, err)
				}
				// A round trip proves the server let the client in.
				if err := nc.FlushTimeout(2 * time.Second); err != nil {
					t.Errorf("good dial %d: flush: %v", i, err)
				}
				nc.Close()
			}
			for _, r := range c.refused {
				nc, err := dial(r.dial).Connect(ctx)
				if err == nil {
					nc.Close()
					t.Errorf("%s: connected, want a refusal", r.name)
					continue
				}
				errs = append(errs, err.Error())
				t.Logf("%s: %v", r.name, err)
				if !strings.Contains(strings.ToLower(err.Error()), r.want) {
					t.Errorf("%s: error %q does not say %q", r.name, err, r.want)
				}
			}
			// A connection lost to a server shutdown logs the loss.
			nc, err := dial(c.good[0]).Connect(ctx)
			if err != nil {
				t.Fatal(err)
			}
			defer nc.Close()
			emb.Shutdown()
			if !waitFor(t, 5*time.Second, func() bool { return strings.Contains(dialLog.String(), "nats disconnected") }) {
				t.Errorf("dial log lacks the disconnection:\n%s", dialLog.String())
			}

			texts := map[string]string{"errors": strings.Join(errs, "\n"), "dial log": dialLog.String(), "server log": serverLog.String()}
			for where, text := range texts {
				for _, s := range c.secrets {
					if strings.Contains(text, s) {
						t.Errorf("%s reveal the secret %.6s…:\n%s", where, s, text)
					}
				}
			}
			if !strings.Contains(dialLog.String(), "nats connected") {
				t.Errorf("dial log lacks the connection:\n%s", dialLog.String())
			}
		})
	}
}

func userPasswordCase() authCase {
	const user, password = "headroom", "s3cret-Pa55/w@rd"
	return authCase{
		name:   "user-password",
		server: func(o *server.Options) { o.Username, o.Password = user, password },
		good: []stream.Dial{
			{User: user, Password: password},
			{URL: "nats://" + user + ":s3cret-Pa55%2Fw%40rd@HOSTPORT"},
		},
		refused: []refusal{
			{"wrong password", stream.Dial{User: user, Password: "wrong-" + password}, authViolation},
			{"no password", stream.Dial{User: user}, authViolation},
			{"no user", stream.Dial{Password: password}, authViolation},
			{"nothing", stream.Dial{}, authViolation},
			{"wrong password in URL", stream.Dial{URL: "nats://" + user + ":x" + password + "x@HOSTPORT"}, "malformed"},
			{"wrong encoded password in URL", stream.Dial{URL: "nats://" + user + ":x-s3cret-Pa55%2Fw%40rd@HOSTPORT"}, authViolation},
		},
		secrets: []string{password, "s3cret-Pa55%2Fw%40rd", "s3cret-Pa55"},
	}
}

func tokenCase() authCase {
	const token = "tok-9f3b2c71e0d84a56"
	return authCase{
		name:   "token",
		server: func(o *server.Options) { o.Authorization = token },
		good: []stream.Dial{
			{Token: token},
			{URL: "nats://" + token + "@HOSTPORT"},
		},
		refused: []refusal{
			{"wrong token", stream.Dial{Token: token + "x"}, authViolation},
			{"wrong token in URL", stream.Dial{URL: "nats://x" + token + "@HOSTPORT"}, authViolation},
			{"nothing", stream.Dial{}, authViolation},
		},
		secrets: []string{token, "9f3b2c71e0d84a56"},
	}
}

func nkeyCase(t *testing.T, dir string) authCase {
	user, seed := newKey(t, nkeys.CreateUser)
	_, otherSeed := newKey(t, nkeys.CreateUser)
	_, accountSeed := newKey(t, nkeys.CreateAccount)
	return authCase{
		name:   "nkey",
		server: func(o *server.Options) { o.Nkeys = []*server.NkeyUser{{Nkey: user}} },
		good:   []stream.Dial{{NKeySeed: writeFile(t, dir, "user.nk", seed)}},
		refused: []refusal{
			{"other user's seed", stream.Dial{NKeySeed: writeFile(t, dir, "other.nk", otherSeed)}, authViolation},
			{"account seed", stream.Dial{NKeySeed: writeFile(t, dir, "account.nk", accountSeed)}, "not a valid nkey user seed"},
			{"seed given instead of its file", stream.Dial{NKeySeed: seed}, "open [redacted]"},
			{"nothing", stream.Dial{}, authViolation},
		},
		secrets: []string{seed, otherSeed, accountSeed},
	}
}

// credsCase runs the server in operator mode with the account held by a
// memory resolver, and the user in a credentials file (JWT and seed).
func credsCase(t *testing.T, dir string) authCase {
	operator, operatorSeed := newKey(t, nkeys.CreateOperator)
	account, accountSeed := newKey(t, nkeys.CreateAccount)
	user, userSeed := newKey(t, nkeys.CreateUser)
	_, otherSeed := newKey(t, nkeys.CreateUser)
	_, strangerAccountSeed := newKey(t, nkeys.CreateAccount)
	operatorKP := keyPair(t, operatorSeed)

	oc := jwt.NewOperatorClaims(operator)
	opJWT, err := oc.Encode(operatorKP)
	if err != nil {
		t.Fatal(err)
	}
	opClaims, err := jwt.DecodeOperatorClaims(opJWT)
	if err != nil {
		t.Fatal(err)
	}
	accJWT, err := jwt.NewAccountClaims(account).Encode(operatorKP)
	if err != nil {
		t.Fatal(err)
	}
	userJWT := func(signer string) string {
		s, err := jwt.NewUserClaims(user).Encode(keyPair(t, signer))
		if err != nil {
			t.Fatal(err)
		}
		return s
	}
	creds := func(name, jwtText string) string {
		b, err := jwt.FormatUserConfig(jwtText, []byte(userSeed))
		if err != nil {
			t.Fatal(err)
		}
		return writeFile(t, dir, name, string(b))
	}
	good := creds("user.creds", userJWT(accountSeed))
	goodText, err := os.ReadFile(good)
	if err != nil {
		t.Fatal(err)
	}
	// The formatter refuses a seed that does not match the JWT, so the
	// mismatched file is the good one with the seed swapped.
	mismatch := writeFile(t, dir, "mismatch.creds", strings.Replace(string(goodText), userSeed, otherSeed, 1))
	return authCase{
		name: "creds",
		server: func(o *server.Options) {
			r := &server.MemAccResolver{}
			if err := r.Store(account, accJWT); err != nil {
				t.Error(err)
			}
			o.TrustedOperators = []*jwt.OperatorClaims{opClaims}
			o.AccountResolver = r
		},
		good: []stream.Dial{{Creds: good}},
		refused: []refusal{
			{"seed of another user", stream.Dial{Creds: mismatch}, authViolation},
			{"unknown account", stream.Dial{Creds: creds("stranger.creds", userJWT(strangerAccountSeed))}, authViolation},
			{"file contents given instead of the file", stream.Dial{Creds: string(goodText)}, "open [redacted]"},
			{"nothing", stream.Dial{}, authViolation},
		},
		secrets: []string{operatorSeed, accountSeed, userSeed, otherSeed, strangerAccountSeed},
	}
}

// tlsCase demands TLS with client certificates from a CA made here; a
// second CA signs the certificates that must be refused.
func tlsCase(t *testing.T, dir string) authCase {
	ca, caKey, caPEM, caKeyPEM := newCA(t, "headroom test CA")
	rogue, rogueKey, roguePEM, rogueKeyPEM := newCA(t, "rogue CA")
	serverCert, serverKey := newLeaf(t, ca, caKey, "127.0.0.1", true)
	clientCert, clientKey := newLeaf(t, ca, caKey, "headroom", false)
	rogueCert, rogueClientKey := newLeaf(t, rogue, rogueKey, "headroom", false)
	pair, err := tls.X509KeyPair(serverCert, serverKey)
	if err != nil {
		t.Fatal(err)
	}
	pool := x509.NewCertPool()
	pool.AddCert(ca)
	caFile := writeFile(t, dir, "ca.pem", string(caPEM))
	certFile := writeFile(t, dir, "client.pem", string(clientCert))
	keyFile := writeFile(t, dir, "client-key.pem", string(clientKey))
	rogueCAFile := writeFile(t, dir, "rogue-ca.pem", string(roguePEM))
	rogueCertFile := writeFile(t, dir, "rogue-client.pem", string(rogueCert))
	rogueKeyFile := writeFile(t, dir, "rogue-client-key.pem", string(rogueClientKey))
	return authCase{
		name: "tls",
		server: func(o *server.Options) {
			o.TLS, o.TLSVerify, o.TLSTimeout = true, true, 2
			o.TLSConfig = &tls.Config{
				Certificates: []tls.Certificate{pair},
				ClientCAs:    pool,
				ClientAuth:   tls.RequireAndVerifyClientCert,
				MinVersion:   tls.VersionTLS12,
			}
		},
		good: []stream.Dial{{TLSCA: caFile, TLSCert: certFile, TLSKey: keyFile}},
		// The server's refusal of a client certificate reaches the client
		// as an alert or as a closed connection, whichever comes first,
		// so those two cases only ask for a TLS error.
		refused: []refusal{
			{"server CA unknown", stream.Dial{TLSCA: rogueCAFile, TLSCert: certFile, TLSKey: keyFile}, "certificate signed by unknown authority"},
			{"no CA", stream.Dial{TLSCert: certFile, TLSKey: keyFile}, "certificate signed by unknown authority"},
			{"client certificate from another CA", stream.Dial{TLSCA: caFile, TLSCert: rogueCertFile, TLSKey: rogueKeyFile}, "tls"},
			{"no client certificate", stream.Dial{TLSCA: caFile}, "tls"},
			{"key of another certificate", stream.Dial{TLSCA: caFile, TLSCert: certFile, TLSKey: rogueKeyFile}, "private key does not match"},
			{"key given instead of its file", stream.Dial{TLSCA: caFile, TLSCert: certFile, TLSKey: string(clientKey)}, "open [redacted]"},
		},
		secrets: append(pemSecrets(clientKey, rogueClientKey, serverKey), pemSecrets(caKeyPEM, rogueKeyPEM)...),
	}
}

// pemSecrets returns each PEM block whole and a stretch of its body,
// which would show if the key were quoted in another form.
func pemSecrets(blocks ...[]byte) []string {
	var out []string
	for _, b := range blocks {
		p, _ := pem.Decode(b)
		body := strings.ReplaceAll(string(pem.EncodeToMemory(&pem.Block{Type: "X", Bytes: p.Bytes})), "\n", "")
		body = strings.TrimSuffix(strings.TrimPrefix(body, "-----BEGIN X-----"), "-----END X-----")
		out = append(out, string(b), body[len(body)/2:len(body)/2+32])
	}
	return out
}

func newKey(t *testing.T, create func() (nkeys.KeyPair, error)) (pub, seed string) {
	t.Helper()
	kp, err := create()
	if err != nil {
		t.Fatal(err)
	}
	p, err := kp.PublicKey()
	if err != nil {
		t.Fatal(err)
	}
	s, err := kp.Seed()
	if err != nil {
		t.Fatal(err)
	}
	return p, string(s)
}

func keyPair(t *testing.T, seed string) nkeys.KeyPair {
	t.Helper()
	kp, err := nkeys.FromSeed([]byte(seed))
	if err != nil {
		t.Fatal(err)
	}
	return kp
}

func newCA(t *testing.T, cn string) (cert *x509.Certificate, key *ecdsa.PrivateKey, certPEM, keyPEM []byte) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber:          big.NewInt(1),
		Subject:               pkix.Name{CommonName: cn},
		NotBefore:             time.Now().Add(-time.Hour),
		NotAfter:              time.Now().Add(time.Hour),
		IsCA:                  true,
		BasicConstraintsValid: true,
		KeyUsage:              x509.KeyUsageCertSign | x509.KeyUsageDigitalSignature,
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	if cert, err = x509.ParseCertificate(der); err != nil {
		t.Fatal(err)
	}
	return cert, key, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), keyToPEM(t, key)
}

// newLeaf signs a server certificate for the IP address cn, or a client
// certificate named cn.
func newLeaf(t *testing.T, ca *x509.Certificate, caKey *ecdsa.PrivateKey, cn string, isServer bool) (certPEM, keyPEM []byte) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	serial, err := rand.Int(rand.Reader, big.NewInt(1<<62))
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber: serial,
		Subject:      pkix.Name{CommonName: cn},
		NotBefore:    time.Now().Add(-time.Hour),
		NotAfter:     time.Now().Add(time.Hour),
		KeyUsage:     x509.KeyUsageDigitalSignature,
		ExtKeyUsage:  []x509.ExtKeyUsage{x509.ExtKeyUsageClientAuth},
	}
	if isServer {
		tmpl.ExtKeyUsage = []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}
		tmpl.IPAddresses = []net.IP{net.ParseIP(cn)}
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, ca, &key.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	return pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), keyToPEM(t, key)
}

func keyToPEM(t *testing.T, key *ecdsa.PrivateKey) []byte {
	t.Helper()
	der, err := x509.MarshalPKCS8PrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	return pem.EncodeToMemory(&pem.Block{Type: "PRIVATE KEY", Bytes: der})
}

func writeFile(t *testing.T, dir, name, text string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, []byte(text), 0o600); err != nil {
		t.Fatal(err)
	}
	return p
}

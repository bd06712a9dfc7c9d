package stream

import (
	"context"
	"errors"
	"fmt"
	"net/url"
	"os"
	"sort"
	"strings"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/rs/zerolog"
)

// Dial describes how to reach a NATS server. Secrets stay in this struct:
// Connect never puts them into a log line or an error, and String prints
// the struct without them.
type Dial struct {
	URL      string
	Creds    string // credentials file (JWT + NKey seed)
	User     string
	Password string
	Token    string
	NKeySeed string // file holding an NKey seed
	TLSCA    string // CA bundle to verify the server
	TLSCert  string // client certificate
	TLSKey   string // client key
	Name     string // connection name shown by the server
	Embedded *Embedded
	Log      zerolog.Logger
}

// Connect opens the connection, reconnecting forever on loss and logging
// each change of state. With Embedded set it connects in-process.
func (d Dial) Connect(ctx context.Context) (*nats.Conn, error) {
	sec := d.secrets()
	name := d.Name
	if name == "" {
		name = "headroom"
	}
	opts := []nats.Option{
		nats.Name(name),
		nats.MaxReconnects(-1),
		nats.ReconnectWait(500 * time.Millisecond),
		nats.ReconnectBufSize(64 << 20),
		nats.DisconnectErrHandler(func(_ *nats.Conn, err error) {
			if err != nil {
				d.Log.Warn().Err(sec.scrubErr(err)).Msg("nats disconnected")
			}
		}),
		nats.ReconnectHandler(func(c *nats.Conn) {
			// The client's own redaction keeps a token given as the
			// URL's user name, so the URL goes through ours.
			d.Log.Info().Str("url", redact(c.ConnectedUrl())).Msg("nats reconnected")
		}),
		nats.ErrorHandler(func(_ *nats.Conn, s *nats.Subscription, err error) {
			ev := d.Log.Warn().Err(sec.scrubErr(err))
			if s != nil {
				ev = ev.Str("subject", s.Subject)
			}
			ev.Msg("nats async error")
		}),
	}
	if d.Creds != "" {
		opts = append(opts, nats.UserCredentials(d.Creds))
	}
	if d.User != "" {
		opts = append(opts, nats.UserInfo(d.User, d.Password))
	}
	if d.Token != "" {
		opts = append(opts, nats.Token(d.Token))
	}
	if d.NKeySeed != "" {
		o, err := nats.NkeyOptionFromSeed(d.NKeySeed)
		if err != nil {
			return nil, fmt.Errorf("stream: nkey seed file: %w", sec.scrubErr(err))
		}
		opts = append(opts, o)
	}
	if d.TLSCA != "" {
		opts = append(opts, nats.RootCAs(d.TLSCA))
	}
	if d.TLSCert != "" || d.TLSKey != "" {
		opts = append(opts, nats.ClientCert(d.TLSCert, d.TLSKey))
	}
	addr := d.URL
	if d.Embedded != nil {
		opts = append(opts, nats.InProcessServer(d.Embedded.Server()))
		addr = d.Embedded.URL()
	}
	if err := checkUserInfo(addr); err != nil {
		return nil, fmt.Errorf("stream: server URL %s: %w", redact(addr), err)
	}
	if deadline, ok := ctx.Deadline(); ok {
		opts = append(opts, nats.Timeout(time.Until(deadline)))
	}
	nc, err := nats.Connect(addr, opts...)
	if err != nil {
		var ue *url.Error
		if errors.As(err, &ue) {
			// A parse error quotes the raw URL and the fragment it choked
			// on, either of which may be part of a password.
			return nil, fmt.Errorf("stream: server URL %s: %w", redact(addr), errMalformedURL)
		}
		return nil, fmt.Errorf("stream: connect to %s with %s: %w", redact(addr), d.auth(), sec.scrubErr(err))
	}
	d.Log.Info().Str("url", redact(addr)).Str("auth", d.auth()).Msg("nats connected")
	return nc, nil
}

// String describes the dial without its secrets, so that printing a Dial
// by mistake reveals nothing.
func (d Dial) String() string {
	addr := d.URL
	switch {
	case d.Embedded != nil:
		addr = "embedded"
	case addr == "":
		addr = nats.DefaultURL
	}
	return fmt.Sprintf("nats %s with %s", redact(addr), d.auth())
}

// GoString keeps %#v from printing the secret fields.
func (d Dial) GoString() string { return "stream.Dial(" + d.String() + ")" }

// auth names the ways the dial authenticates, for messages that must say
// what was tried without saying with what.
func (d Dial) auth() string {
	var m []string
	if len(userInfos(d.URL)) > 0 {
		m = append(m, "URL user information")
	}
	if d.Creds != "" {
		m = append(m, "credentials file")
	}
	if d.User != "" {
		m = append(m, "user/password")
	}
	if d.Token != "" {
		m = append(m, "token")
	}
	if d.NKeySeed != "" {
		m = append(m, "nkey")
	}
	if d.TLSCert != "" || d.TLSKey != "" {
		m = append(m, "client certificate")
	}
	if len(m) == 0 {
		m = append(m, "no credentials")
	}
	if d.TLSCA != "" {
		m = append(m, "TLS CA file")
	}
	return strings.Join(m, ", ")
}

// errMalformedURL stands in for a URL parse error, whose text would
// quote the URL.
var errMalformedURL = errors.New("malformed; percent-encode special characters in the user information")

// checkUserInfo refuses a URL whose '@' the parser would not read as the
// end of the user information (a password holding '/', '?' or '#'): the
// client would then dial part of the password as a host.
func checkUserInfo(addr string) error {
	for _, s := range strings.Split(addr, ",") {
		s = strings.TrimSpace(s)
		if !strings.Contains(s, "@") {
			continue
		}
		if !strings.Contains(s, "://") {
			s = "nats://" + s
		}
		u, err := url.Parse(s)
		if err != nil || u.User == nil || (u.Path != "" && u.Path != "/") || u.RawQuery != "" || u.Fragment != "" {
			return errMalformedURL
		}
	}
	return nil
}

// Redact returns addr, one NATS URL or a comma-separated list, with the
// user information of every URL (user, password or token) replaced, for
// logs and messages.
func Redact(addr string) string { return redact(addr) }

// redact removes the user information from every URL in a
// comma-separated list before it is shown. It reads as user information
// everything up to the last '@' after a "://", whatever the characters,
// so that a password the parser would split still disappears whole.
func redact(addr string) string {
	parts := strings.Split(addr, "://")
	for i, p := range parts {
		if at := strings.LastIndexByte(p, '@'); at >= 0 {
			parts[i] = "[redacted]" + p[at:]
		}
	}
	return strings.Join(parts, "://")
}

// userInfos returns the user information of every URL in addr, read the
// way redact reads it.
func userInfos(addr string) []string {
	var out []string
	for _, p := range strings.Split(addr, "://") {
		if at := strings.LastIndexByte(p, '@'); at > 0 {
			out = append(out, p[:at])
		}
	}
	return out
}

// secrets are the strings of a Dial that must not reach a log line or an
// error, longest first so that one holding another is replaced whole.
type secrets []string

// minFragment is the shortest piece of URL user information that is
// scrubbed on its own; shorter ones would mangle every message.
const minFragment = 3

func (d Dial) secrets() secrets {
	var s secrets
	add := func(v string) {
		if v != "" {
			s = append(s, v)
		}
	}
	add(d.Password)
	add(d.Token)
	for _, ui := range userInfos(d.URL) {
		add(ui)
		if dec, err := url.PathUnescape(ui); err == nil && dec != ui {
			add(dec)
		}
		// A malformed URL can leave part of a password in a host or port.
		for _, f := range strings.FieldsFunc(ui, func(r rune) bool { return strings.ContainsRune(":/?#,", r) }) {
			if len(f) >= minFragment {
				add(f)
			}
		}
	}
	// A value that names no file may be the secret itself, pasted where
	// its path belongs; the client would quote it in "no such file".
	for _, f := range []string{d.Creds, d.NKeySeed, d.TLSKey} {
		if f == "" {
			continue
		}
		if _, err := os.Stat(f); err != nil {
			add(f)
		}
	}
	sort.Slice(s, func(i, j int) bool { return len(s[i]) > len(s[j]) })
	return s
}

func (s secrets) scrub(text string) string {
	for _, v := range s {
		text = strings.ReplaceAll(text, v, "[redacted]")
	}
	return text
}

// scrubErr returns err with every secret removed from its text. errors.Is
// still finds the errors it wraps, whose own text is left as it was.
func (s secrets) scrubErr(err error) error {
	if err == nil {
		return nil
	}
	text := err.Error()
	if clean := s.scrub(text); clean != text {
		return &scrubbedError{msg: clean, err: err}
	}
	return err
}

type scrubbedError struct {
	msg string
	err error
}

func (e *scrubbedError) Error() string { return e.msg }
func (e *scrubbedError) Unwrap() error { return e.err }

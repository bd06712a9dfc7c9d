package stream_test

import (
	"context"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/rs/zerolog"

	"github.com/headroom-dev/headroom/stream"
)

// TestDialUserPassword connects to an embedded server that requires a user
// and password, and checks that a refused password is not echoed in the
// error.
func TestDialUserPassword(t *testing.T) {
	const secret = "s3cret-Pa55"
	emb, err := stream.StartEmbedded(context.Background(), stream.EmbeddedConfig{Port: -1, Log: zerolog.Nop(),
		ExtraOpts: func(o *server.Options) { o.Username, o.Password = "headroom", secret }})
	if err != nil {
		t.Fatal(err)
	}
	defer emb.Shutdown()
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	nc, err := stream.Dial{URL: emb.URL(), User: "headroom", Password: secret, Log: zerolog.Nop()}.Connect(ctx)
	if err != nil {
		t.Fatalf("good credentials refused: %v", err)
	}
	nc.Close()
	_, err = stream.Dial{URL: emb.URL(), User: "headroom", Password: "wrong-" + secret, Log: zerolog.Nop()}.Connect(ctx)
	if err == nil {
		t.Fatal("bad password accepted")
	}
	if strings.Contains(err.Error(), secret) {
		t.Errorf("error reveals the password: %v", err)
	}
	// A URL with user information is redacted in errors.
	_, err = stream.Dial{URL: "nats://headroom:" + secret + "@127.0.0.1:1", Log: zerolog.Nop()}.Connect(ctx)
	if err == nil || strings.Contains(err.Error(), secret) {
		t.Errorf("error %v: want a refusal without the password", err)
	}
}

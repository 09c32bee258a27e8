package natsrc

import (
	"errors"
	"reflect"
	"testing"
	"time"

	"gopkg.in/yaml.v3"

	"github.com/exergywatch/exergywatch/config/natsconn"
)

// The source's connection keys are the shared ones of config/natsconn
// (the NATS sink uses the same), decoded inline next to the source's own
// keys, and the source applies its own defaults on top.
func TestConnectionKeysShared(t *testing.T) {
	doc := `urls: [tls://a:4222, tls://b:4222]
name: exw
user: u
password: p
reconnect_wait: 250ms
tls: {ca_file: /ca.pem, server_name: nats.example}
subjects: [plant.>]
mode: core
`
	var c Config
	if err := yaml.Unmarshal([]byte(doc), &c); err != nil {
		t.Fatal(err)
	}
	want := natsconn.Settings{URLs: []string{"tls://a:4222", "tls://b:4222"}, Name: "exw", User: "u", Password: "p",
		ReconnectWait: 250 * time.Millisecond, TLS: &TLSConfig{CAFile: "/ca.pem", ServerName: "nats.example"}}
	if !reflect.DeepEqual(c.Settings, want) {
		t.Fatalf("settings %+v, want %+v", c.Settings, want)
	}
	if err := c.defaults(); err != nil {
		t.Fatal(err)
	}
	if c.ReconnectBufferBytes != max(1<<20, 128*c.MaxAckPending) {
		t.Errorf("reconnect buffer default %d", c.ReconnectBufferBytes)
	}
	// The shared checks apply: one authentication method only.
	c.Token = "t"
	if err := c.defaults(); !errors.Is(err, ErrConfig) || !errors.Is(err, natsconn.ErrSettings) {
		t.Errorf("user and token together: %v, want ErrConfig wrapping natsconn.ErrSettings", err)
	}
}

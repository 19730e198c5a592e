package main

import (
	"errors"
	"flag"
	"io"
	"testing"
	"time"
)

func env(m map[string]string) func(string) string { return func(k string) string { return m[k] } }

// TestParseDefaults checks the documented defaults with no flags and no
// environment.
func TestParseDefaults(t *testing.T) {
	c, err := parseConfig(nil, env(nil), io.Discard)
	if err != nil {
		t.Fatal(err)
	}
	if c.GRPCAddr != ":50051" || c.MetricsAddr != ":9464" || !c.Reflection || c.Drain != 20*time.Second || c.Server.MaxConcurrentSolves < 1 {
		t.Errorf("defaults %+v", c)
	}
}

// TestParseEnvAndFlags checks that FUGAD_* variables fill in and that an
// explicit flag wins over them.
func TestParseEnvAndFlags(t *testing.T) {
	e := env(map[string]string{"FUGAD_GRPC_ADDR": "127.0.0.1:7000", "FUGAD_REFLECTION": "false", "FUGAD_MAX_CONCURRENT_SOLVES": "3"})
	c, err := parseConfig([]string{"--max-concurrent-solves=5"}, e, io.Discard)
	if err != nil {
		t.Fatal(err)
	}
	if c.GRPCAddr != "127.0.0.1:7000" || c.Reflection || c.Server.MaxConcurrentSolves != 5 {
		t.Errorf("got %+v", c)
	}
}

// TestParseErrors checks that bad flags, bad environment values and
// inconsistent TLS settings are refused.
func TestParseErrors(t *testing.T) {
	cases := []struct {
		args []string
		env  map[string]string
	}{
		{[]string{"--no-such-flag"}, nil},
		{[]string{"--drain-timeout=soon"}, nil},
		{nil, map[string]string{"FUGAD_MAX_COMPONENTS": "many"}},
		{[]string{"--tls-cert=a.pem"}, nil},
		{[]string{"--tls-client-ca=ca.pem"}, nil},
		{[]string{"extra"}, nil},
	}
	for _, tc := range cases {
		if _, err := parseConfig(tc.args, env(tc.env), io.Discard); err == nil || errors.Is(err, flag.ErrHelp) {
			t.Errorf("%v %v: err = %v, want a parse error", tc.args, tc.env, err)
		}
	}
}

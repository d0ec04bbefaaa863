package main

import (
	"flag"
	"fmt"
	"log/slog"
	"math/rand/v2"
	"os"
	"time"

	"github.com/nats-io/nats.go"
)

// natsFlags are the connection flags of the commands that talk to a NATS
// server (run with --nats, publish).
type natsFlags struct {
	url, creds, nkey, user, password, token, tlsCA, tlsCert, tlsKey *string
}

func addNATSFlags(fs *flag.FlagSet, urlDefault, urlHelp string) *natsFlags {
	return &natsFlags{
		url:      fs.String("nats", urlDefault, urlHelp),
		creds:    fs.String("nats-creds", "", "NATS credentials file (JWT and NKey seed)"),
		nkey:     fs.String("nats-nkey", "", "NATS NKey seed file"),
		user:     fs.String("nats-user", "", "NATS user name"),
		password: fs.String("nats-password", "", "NATS password (or the environment variable SHOAL_NATS_PASSWORD, which keeps it out of the process list)"),
		token:    fs.String("nats-token", "", "NATS authentication token (or SHOAL_NATS_TOKEN)"),
		tlsCA:    fs.String("nats-tls-ca", "", "PEM file of the CA that signed the NATS server's certificate"),
		tlsCert:  fs.String("nats-tls-cert", "", "PEM client certificate for NATS (with --nats-tls-key)"),
		tlsKey:   fs.String("nats-tls-key", "", "PEM client key for NATS (with --nats-tls-cert)"),
	}
}

// validate reports bad combinations of connection flags.
func (f *natsFlags) validate() error {
	auth := 0
	for _, s := range []string{*f.creds, *f.nkey, *f.user, *f.token} {
		if s != "" {
			auth++
		}
	}
	switch {
	case auth > 1:
		return usagef("give at most one of --nats-creds, --nats-nkey, --nats-user, --nats-token")
	case *f.password != "" && *f.user == "":
		return usagef("--nats-password needs --nats-user")
	case (*f.tlsCert == "") != (*f.tlsKey == ""):
		return usagef("--nats-tls-cert and --nats-tls-key go together")
	}
	for _, p := range []string{*f.creds, *f.nkey, *f.tlsCA, *f.tlsCert, *f.tlsKey} {
		if p == "" {
			continue
		}
		if _, err := os.Stat(p); err != nil {
			return usagef("%v", err)
		}
	}
	return nil
}

// options returns the nats.go options for the flags: authentication, TLS,
// and reconnecting forever with a capped exponential backoff and jitter, so
// that a broker outage is waited out without losing the client's place.
func (f *natsFlags) options(name string, log *slog.Logger) ([]nats.Option, error) {
	opts := []nats.Option{
		nats.Name(name),
		nats.MaxReconnects(-1),
		nats.RetryOnFailedConnect(true),
		nats.ReconnectBufSize(8 << 20),
		nats.CustomReconnectDelay(reconnectDelay),
		nats.DisconnectErrHandler(func(_ *nats.Conn, err error) {
			if err != nil {
				log.Warn("nats: disconnected", "err", err)
			}
		}),
		nats.ReconnectHandler(func(nc *nats.Conn) { log.Info("nats: reconnected", "server", nc.ConnectedUrlRedacted()) }),
		nats.ErrorHandler(func(_ *nats.Conn, _ *nats.Subscription, err error) { log.Warn("nats: asynchronous error", "err", err) }),
	}
	pass := *f.password
	if pass == "" {
		pass = os.Getenv("SHOAL_NATS_PASSWORD")
	}
	token := *f.token
	if token == "" && *f.user == "" && *f.creds == "" && *f.nkey == "" {
		token = os.Getenv("SHOAL_NATS_TOKEN")
	}
	switch {
	case *f.creds != "":
		opts = append(opts, nats.UserCredentials(*f.creds))
	case *f.nkey != "":
		o, err := nats.NkeyOptionFromSeed(*f.nkey)
		if err != nil {
			return nil, usagef("--nats-nkey: %v", err)
		}
		opts = append(opts, o)
	case *f.user != "":
		opts = append(opts, nats.UserInfo(*f.user, pass))
	case token != "":
		opts = append(opts, nats.Token(token))
	}
	if *f.tlsCA != "" {
		opts = append(opts, nats.RootCAs(*f.tlsCA))
	}
	if *f.tlsCert != "" {
		opts = append(opts, nats.ClientCert(*f.tlsCert, *f.tlsKey))
	}
	return opts, nil
}

// reconnectDelay backs off from 100ms to 5s, with up to 50% jitter so
// that many clients do not hammer a restarting server in step.
func reconnectDelay(attempts int) time.Duration {
	d := 100 * time.Millisecond << min(attempts, 6)
	d = min(d, 5*time.Second)
	return d/2 + time.Duration(rand.Int64N(int64(d/2)+1))
}

// connectNATS connects to url with the flags' options. With
// RetryOnFailedConnect the call returns at once even if the server is
// down; the client keeps trying.
func (f *natsFlags) connect(url, name string, log *slog.Logger) (*nats.Conn, error) {
	opts, err := f.options(name, log)
	if err != nil {
		return nil, err
	}
	nc, err := nats.Connect(url, opts...)
	if err != nil {
		return nil, fmt.Errorf("connect to %s: %w", url, err)
	}
	return nc, nil
}

package main

import (
	"flag"
	"os"

	"strayleaf/client"
)

// remoteFlags are the flags of commands that can talk to a strayleafd instead of a local store:
// --server ADDR --token T --tls-ca FILE. The token may come from STRAYLEAF_TOKEN instead, which
// keeps it out of the shell history and the process list.
type remoteFlags struct {
	server, token, tlsCA *string
}

// tokenEnv is the environment variable read when --token is not given.
const tokenEnv = "STRAYLEAF_TOKEN"

func addRemoteFlags(fs *flag.FlagSet) *remoteFlags {
	return &remoteFlags{
		server: fs.String("server", "", "call the strayleafd at this gRPC address (host:port) instead of a local store"),
		token:  fs.String("token", "", "bearer token for --server (default: $"+tokenEnv+")"),
		tlsCA:  fs.String("tls-ca", "", "connect to --server over TLS, trusting the CA certificates in this PEM file"),
	}
}

// remote reports whether --server was given.
func (r *remoteFlags) remote() bool { return *r.server != "" }

// dial connects to the server named by the flags. The caller closes the client.
func (r *remoteFlags) dial() (*client.Client, error) {
	tok := *r.token
	if tok == "" {
		tok = os.Getenv(tokenEnv)
	}
	var opts []client.Option
	if tok != "" {
		opts = append(opts, client.WithToken(tok))
	}
	if *r.tlsCA != "" {
		opts = append(opts, client.WithCAFile(*r.tlsCA))
	}
	return client.Dial(*r.server, opts...)
}

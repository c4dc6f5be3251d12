// Command strayleafd serves frozen strayleaf group models over gRPC and REST/JSON.
//
//	strayleafd --store models.db --tokens tokens.txt [--grpc-addr ADDR] [--http-addr ADDR]
//	           [--tls-cert FILE --tls-key FILE] [--demo] [limits...]
//
// SIGHUP rereads the tokens file; SIGTERM or SIGINT stops taking requests, lets those in flight
// finish, closes the store and exits 0.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"syscall"
	"time"

	"strayleaf/api"
	"strayleaf/api/server"
)

func main() {
	os.Exit(run(os.Args[1:], os.Stderr))
}

func run(args []string, stderr io.Writer) int {
	fs := flag.NewFlagSet("strayleafd", flag.ContinueOnError)
	fs.SetOutput(stderr)
	var cfg api.Config
	lim := server.DefaultLimits()
	fs.StringVar(&cfg.StorePath, "store", "", "model store file (bbolt; created if missing)")
	fs.StringVar(&cfg.GRPCAddr, "grpc-addr", "127.0.0.1:7450", "gRPC listen address")
	fs.StringVar(&cfg.HTTPAddr, "http-addr", "127.0.0.1:7451", "REST, /openapi.json, /healthz, /readyz and /metrics listen address (empty: none)")
	fs.StringVar(&cfg.TokensFile, "tokens", "", "tokens file: lines NAME ROLE SHA256-HEX (see `strayleaf token new`); reread on SIGHUP")
	fs.BoolVar(&cfg.InsecureNoAuth, "insecure-no-auth", false, "let every caller in as admin, without a token: for local demos only")
	fs.StringVar(&cfg.TLSCertFile, "tls-cert", "", "TLS certificate (PEM) for both listeners")
	fs.StringVar(&cfg.TLSKeyFile, "tls-key", "", "TLS private key (PEM)")
	fs.BoolVar(&cfg.Demo, "demo", false, "if the store has no models, train the embedded demo and publish it as demo (alias current)")
	fs.IntVar(&lim.MaxUnitsPerWitness, "max-units-per-witness", lim.MaxUnitsPerWitness, "most readings one witness may give")
	fs.IntVar(&lim.MaxWitnessesPerStream, "max-witnesses-per-stream", lim.MaxWitnessesPerStream, "most witnesses one PlaceStream call may send")
	fs.IntVar(&lim.MaxMessageBytes, "max-message-bytes", lim.MaxMessageBytes, "largest request message or body, a published bundle included")
	fs.IntVar(&lim.StreamWorkers, "stream-workers", lim.StreamWorkers, "goroutines placing the witnesses of one stream")
	fs.DurationVar(&cfg.RequestTimeout, "request-timeout", 30*time.Second, "longest a unary request may take")
	shutdownTimeout := fs.Duration("shutdown-timeout", 30*time.Second, "longest to wait for requests in flight at shutdown")
	fs.Int64Var(&cfg.CacheBytes, "cache-bytes", 0, "memory bound of the decoded-model cache (0: the store's default)")
	logLevel := fs.String("log-level", "info", "debug (every request), info, warn or error")
	logFormat := fs.String("log-format", "text", "text or json")
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(stderr, "strayleafd: unexpected arguments %q\n", fs.Args())
		return 2
	}
	var level slog.Level
	if err := level.UnmarshalText([]byte(*logLevel)); err != nil {
		fmt.Fprintf(stderr, "strayleafd: --log-level %q: expected debug, info, warn or error\n", *logLevel)
		return 2
	}
	hopts := &slog.HandlerOptions{Level: level}
	switch *logFormat {
	case "text":
		cfg.Logger = slog.New(slog.NewTextHandler(stderr, hopts))
	case "json":
		cfg.Logger = slog.New(slog.NewJSONHandler(stderr, hopts))
	default:
		fmt.Fprintf(stderr, "strayleafd: --log-format %q: expected text or json\n", *logFormat)
		return 2
	}
	cfg.Limits = lim
	log := cfg.Logger

	// Signals are caught before the listeners open, so that none is missed.
	sigs := make(chan os.Signal, 4)
	signal.Notify(sigs, syscall.SIGHUP, syscall.SIGTERM, os.Interrupt)
	d, err := api.Start(context.Background(), cfg)
	if err != nil {
		log.Error("cannot start", "error", err)
		return 1
	}
	for {
		select {
		case s := <-sigs:
			if s == syscall.SIGHUP {
				d.ReloadTokens()
				continue
			}
			log.Info("signal received", "signal", s.String())
			ctx, cancel := context.WithTimeout(context.Background(), *shutdownTimeout)
			err := d.Shutdown(ctx)
			cancel()
			if err != nil {
				log.Error("shutdown", "error", err)
				return 1
			}
			return 0
		case err := <-d.Failed():
			log.Error("a listener failed; stopping", "error", err)
			ctx, cancel := context.WithTimeout(context.Background(), *shutdownTimeout)
			d.Shutdown(ctx)
			cancel()
			return 1
		}
	}
}

// Command modegridd serves the modegrid gRPC API.
package main

import (
	"flag"
	"log/slog"
	"net"
	"os"
	"os/signal"
	"syscall"

	"google.golang.org/grpc"

	"github.com/materials-lab/modegrid/server"
)

func main() {
	listen := flag.String("listen", envOr("MODEGRID_LISTEN", "127.0.0.1:7420"), "gRPC listen address (env MODEGRID_LISTEN)")
	flag.Parse()
	log := slog.New(slog.NewJSONHandler(os.Stderr, nil))
	lis, err := net.Listen("tcp", *listen)
	if err != nil {
		log.Error("listen", "addr", *listen, "err", err)
		os.Exit(1)
	}
	gs := grpc.NewServer()
	server.Register(gs, server.NewService())
	go func() {
		ch := make(chan os.Signal, 1)
		signal.Notify(ch, syscall.SIGTERM, syscall.SIGINT)
		<-ch
		gs.GracefulStop()
	}()
	log.Info("serving", "addr", lis.Addr().String())
	if err := gs.Serve(lis); err != nil {
		log.Error("serve", "err", err)
		os.Exit(1)
	}
}

func envOr(key, def string) string {
	if v := os.Getenv(key); v != "" {
		return v
	}
	return def
}

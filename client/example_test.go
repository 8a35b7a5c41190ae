package client_test

import (
	"context"
	"fmt"
	"log"
	"net"
	"path/filepath"
	"time"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
	"github.com/materials-lab/modegrid/server"
)

// serve starts an in-process modegrid server on a loopback port for the
// examples (in real use the target is a running modegridd, e.g.
// "dns:///modegrid-headless.lab.svc:7420").
func serve() (addr string, stop func()) {
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		log.Fatal(err)
	}
	srv, err := server.New(server.Config{MetricsListen: "off"})
	if err != nil {
		log.Fatal(err)
	}
	go srv.Serve(lis)
	return lis.Addr().String(), func() {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		srv.Shutdown(ctx)
	}
}

var modelFile = filepath.Join("..", "proto", "examples", "chain.json")

// A caller's whole use: dial, load a model file, ask for frequencies.
func Example() {
	addr, stop := serve()
	defer stop()

	c, err := client.Dial(addr) // retries, balancing and keepalive by default
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()
	model, err := client.LoadModel(modelFile)
	if err != nil {
		log.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	resp, err := c.Modes(ctx, &modegridv1.ComputeModesRequest{
		Model:   client.Inline(model), // sent once; later calls send its hash
		Qpoints: client.QList([3]float64{0.25, 0, 0}, [3]float64{0.5, 0, 0}),
	})
	if err != nil {
		log.Fatal(err)
	}
	// The chain's ν = (1/π)·sqrt(K/M)·|sin(πq)| (Kittel, ch. 4): 4.2814 and 6.0548 THz.
	for _, p := range resp.GetPoints() {
		fmt.Printf("q = %.2f: %.4f THz\n", p.GetQ().GetQ1(), p.GetFrequencies()[0])
	}
	// Output:
	// q = 0.25: 4.2814 THz
	// q = 0.50: 6.0548 THz
}

// The density of states and the heat capacity of a model on one grid; the
// server diagonalises the grid once for both. (A shifted grid leaves out Γ,
// whose zero-frequency modes need a limit.)
func ExampleClient_Thermal() {
	addr, stop := serve()
	defer stop()
	c, err := client.Dial(addr)
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()
	model, err := client.LoadModel(modelFile)
	if err != nil {
		log.Fatal(err)
	}
	ctx := context.Background()
	grid := client.ShiftedGrid(256)
	dos, err := c.DOS(ctx, &modegridv1.ComputeDosRequest{Model: client.Inline(model), Qpoints: grid})
	if err != nil {
		log.Fatal(err)
	}
	th, err := c.Thermal(ctx, &modegridv1.ComputeThermalRequest{
		Model: client.Inline(model), Qpoints: grid, TemperaturesK: []float64{300},
	})
	if err != nil {
		log.Fatal(err)
	}
	// High-temperature series Cv/R = 1 − ⟨x²⟩/12 + ⟨x⁴⟩/240 with
	// x = hν/kT, ν = 6.0548 THz·|sin πq| (Kittel, ch. 5): 8.0005 J/(mol·K).
	fmt.Printf("states per cell: %.0f\n", dos.GetStatesPerCell())
	fmt.Printf("Cv(300 K) = %.2f J/(mol·K)\n", th.GetPoints()[0].GetHeatCapacityJPerMolK())
	// Output:
	// states per cell: 1
	// Cv(300 K) = 8.00 J/(mol·K)
}

// Streaming a large grid with a progress callback.
func ExampleClient_Modes_progress() {
	addr, stop := serve()
	defer stop()
	c, err := client.Dial(addr)
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()
	model, err := client.LoadModel(modelFile)
	if err != nil {
		log.Fatal(err)
	}
	last := 0
	resp, err := c.Modes(context.Background(),
		&modegridv1.ComputeModesRequest{Model: client.Inline(model), Qpoints: client.Grid(1000), ChunkSize: 100},
		client.Progress(func(done, total int) { last = done }))
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(len(resp.GetPoints()), "points,", last, "reported")
	// Output: 1000 points, 1000 reported
}

// Dialing a replicated service with TLS, a bearer token and model affinity.
func ExampleDial() {
	c, err := client.Dial("dns:///modegrid-headless.lab.svc:7420",
		client.WithTLS(nil), // system roots; WithCAFile for a lab CA
		client.WithToken("secret-from-a-file"),
		client.WithModelAffinity(), // same model → same replica (ring_hash)
	)
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()
	fmt.Println("ready; the connection is made on the first call")
	// Output: ready; the connection is made on the first call
}

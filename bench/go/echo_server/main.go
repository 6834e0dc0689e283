// Command echo_server is the bare gRPC baseline of bench/call_cost for Go
// connectors: the Echo service of bench/echo.proto served by gRPC for Go
// with the Go adapter's server settings, started like the C++ echo child
// (WEIR_LISTEN_ADDRESS; the address it listens on written to WEIR_READY_FD,
// 3 when unset). call_cost uses it instead of its own echo child when
// WEIR_BENCH_ECHO_SERVER names it (docs/performance.md).
package main

import (
	"context"
	"fmt"
	"net"
	"os"
	"strconv"
	"strings"

	"weir/adapter"
	"weir/bench/echopb"
)

type echo struct {
	echopb.UnimplementedEchoServer
}

func (echo) Echo(ctx context.Context, r *echopb.EchoMessage) (*echopb.EchoMessage, error) {
	if r.AnswerBytes == 0 {
		return &echopb.EchoMessage{Payload: r.Payload}, nil
	}
	return &echopb.EchoMessage{Payload: []byte(strings.Repeat("y", int(r.AnswerBytes)))}, nil
}

func main() {
	if err := run(); err != nil {
		fmt.Fprintf(os.Stderr, "echo_server: %v\n", err)
		os.Exit(2)
	}
}

func run() error {
	listen := os.Getenv("WEIR_LISTEN_ADDRESS")
	fd := 3
	if v := os.Getenv("WEIR_READY_FD"); v != "" {
		var err error
		if fd, err = strconv.Atoi(v); err != nil {
			return fmt.Errorf("WEIR_READY_FD %q: %v", v, err)
		}
	}
	var l net.Listener
	var err error
	address := listen
	if strings.HasPrefix(listen, "unix:") {
		l, err = net.Listen("unix", strings.TrimPrefix(listen, "unix:"))
	} else {
		l, err = net.Listen("tcp", listen)
		if err == nil {
			address = listen[:strings.LastIndex(listen, ":")+1] + strconv.Itoa(l.Addr().(*net.TCPAddr).Port)
		}
	}
	if err != nil {
		return err
	}
	server := adapter.NewGRPCServer()
	echopb.RegisterEchoServer(server, echo{})
	ready := os.NewFile(uintptr(fd), "ready")
	if _, err := ready.WriteString(address + "\n"); err != nil {
		return err
	}
	ready.Close()
	return server.Serve(l)
}

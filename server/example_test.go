package server_test

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"os"
	"strings"

	"veer/functions/cell"
	"veer/server"
)

// Start a server on a free loopback port, call a function over HTTP and shut
// the server down.
func Example() {
	dir, _ := os.MkdirTemp("", "veer-example")
	defer os.RemoveAll(dir)
	cat := cell.NewCatalogue(cell.Func{
		Name: "VEER.EXAMPLE.TWICE", Summary: "twice a number", Result: cell.ShapeValue,
		Params: []cell.Param{{Name: "x", Type: cell.TypeNumber}},
		Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
			x, _ := a.Number(0)
			return 2 * x, nil
		},
	})
	s, err := server.New(server.Config{DataDir: dir, Catalogue: cat, Logger: slog.New(slog.DiscardHandler)})
	if err != nil {
		fmt.Println(err)
		return
	}
	s.Registry().AddBuiltin("demo", []byte(`{"demo":true}`))
	ln, _ := net.Listen("tcp", "127.0.0.1:0")
	ctx, stop := context.WithCancel(context.Background())
	defer stop()
	done := make(chan error)
	go func() { done <- s.Serve(ctx, ln) }()

	resp, err := http.Post("http://"+ln.Addr().String()+"/v1/call", "application/json",
		strings.NewReader(`[{"fn":"VEER.EXAMPLE.TWICE","args":[21]},{"fn":"VEER.EXAMPLE.TWICE","args":["x"]}]`))
	if err != nil {
		fmt.Println(err)
		return
	}
	b, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	fmt.Print(string(b))

	stop()
	fmt.Println(<-done)
	// Output:
	// [{"value":42},{"error":{"code":"#VALUE!","message":"VEER.EXAMPLE.TWICE: argument 'x' must be a number; got text \"x\""}}]
	// <nil>
}

func ExampleReadOrCreateToken() {
	dir, _ := os.MkdirTemp("", "veer-example")
	defer os.RemoveAll(dir)
	tok, _ := server.ReadOrCreateToken(dir)
	again, _ := server.ReadOrCreateToken(dir)
	fmt.Println(len(tok), tok == again)
	// Output: 64 true
}

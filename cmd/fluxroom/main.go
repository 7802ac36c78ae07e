// Command fluxroom runs a magnetism teaching lab's oversight server, a
// simulated demo class, and the tools around them. Run `fluxroom help`.
package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"os/signal"
	"syscall"
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	m := NewMain(os.Stdout, os.Stderr)
	err := m.Run(ctx, os.Args[1:])
	var usage usageError
	switch {
	case err == nil:
	case errors.As(err, &usage):
		fmt.Fprintln(os.Stderr, "fluxroom:", err)
		os.Exit(2)
	default:
		fmt.Fprintln(os.Stderr, "fluxroom:", err)
		os.Exit(1)
	}
}

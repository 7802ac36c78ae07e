// Command fluxroom runs a magnetism teaching lab's oversight server, a
// simulated demo class, and the tools around them. Run `fluxroom help`.
package main

import (
	"context"
	"errors"
	"flag"
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
	if code := exitCode(err); code != 0 {
		fmt.Fprintln(os.Stderr, "fluxroom:", err)
		os.Exit(code)
	}
}

// exitCode is the exit status for what Run returned: 0 for success and for
// a request for help (the usage was printed), 2 for a mistake in the
// command line, 1 for anything else.
func exitCode(err error) int {
	var usage usageError
	switch {
	case err == nil, errors.Is(err, flag.ErrHelp):
		return 0
	case errors.As(err, &usage):
		return 2
	}
	return 1
}

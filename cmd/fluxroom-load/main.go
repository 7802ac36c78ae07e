// Command fluxroom-load is the scale benchmark behind make bench: it starts
// the built fluxroom program as real servers (child processes on loopback
// with temporary bbolt files), drives stations, dashboards and the
// baselines its figures are divided by, and prints each figure beside its
// target. It is a measuring tool, not part of the product: the fluxroom
// binary carries none of it.
//
//	go build -o bin/fluxroom-load ./cmd/fluxroom-load
//	bin/fluxroom-load --fluxroom bin/fluxroom [--full]
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"
)

// echoChild is the hidden first argument that makes this program the echo
// baseline's server, a child of its own run.
const echoChild = "echo-child"

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	var err error
	if len(os.Args) > 1 && os.Args[1] == echoChild {
		err = echoServe(ctx, os.Args[2:])
	} else {
		err = run(ctx, os.Stdout, os.Stderr, os.Args[1:])
	}
	var ue usageError
	switch {
	case errors.Is(err, flag.ErrHelp):
	case errors.As(err, &ue):
		fmt.Fprintln(os.Stderr, "fluxroom-load:", err)
		os.Exit(2)
	case err != nil:
		fmt.Fprintln(os.Stderr, "fluxroom-load:", err)
		os.Exit(1)
	}
}

// usageError is a mistake in the command line; main exits 2 for it.
type usageError struct{ msg string }

func (e usageError) Error() string { return e.msg }

// newFlags returns a flag set that reports to stderr and returns errors.
func newFlags(name string, stderr io.Writer) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(stderr)
	return fs
}

// parse parses args and allows no positional arguments.
func parse(fs *flag.FlagSet, args []string) error {
	if err := fs.Parse(args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usageError{fmt.Sprintf("%s: unexpected argument %q", fs.Name(), fs.Arg(0))}
	}
	return nil
}

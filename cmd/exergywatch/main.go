// Command exergywatch is the single binary of the project. Each subcommand
// lives in its own file and registers itself in init with register, so the
// files stay independent of each other.
package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"os/signal"
	"sort"
	"syscall"
	"time"
)

// command is one subcommand. run receives the arguments after the
// subcommand name and returns the process exit status: 0 success, 1 a
// runtime failure, 2 bad usage or bad input.
type command struct {
	summary string
	run     func(args []string, stdout, stderr io.Writer) int
}

var commands = map[string]command{}

func register(name, summary string, run func(args []string, stdout, stderr io.Writer) int) {
	if _, dup := commands[name]; dup {
		panic("exergywatch: command registered twice: " + name)
	}
	commands[name] = command{summary: summary, run: run}
}

func usage(w io.Writer) {
	fmt.Fprintln(w, "usage: exergywatch <command> [flags]")
	fmt.Fprintln(w, "")
	fmt.Fprintln(w, "exergywatch is advisory performance monitoring, not a protection or trip system.")
	fmt.Fprintln(w, "")
	fmt.Fprintln(w, "commands:")
	names := make([]string, 0, len(commands))
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-10s %s\n", n, commands[n].summary)
	}
	fmt.Fprintln(w, "")
	fmt.Fprintln(w, "run 'exergywatch <command> -h' for the flags of a command")
}

func main() {
	os.Exit(dispatch(os.Args[1:], os.Stdout, os.Stderr))
}

func dispatch(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		usage(stderr)
		return 2
	}
	switch args[0] {
	case "-h", "-help", "--help", "help":
		usage(stdout)
		return 0
	}
	c, ok := commands[args[0]]
	if !ok {
		fmt.Fprintf(stderr, "exergywatch: unknown command %q\n", args[0])
		usage(stderr)
		return 2
	}
	return c.run(args[1:], stdout, stderr)
}

// signalContext returns a context that ends on SIGINT or SIGTERM, or after
// d when d > 0. The caller must call the returned stop function.
func signalContext(d time.Duration) (context.Context, context.CancelFunc) {
	ctx, stopSignals := signal.NotifyContext(context.Background(), syscall.SIGINT, syscall.SIGTERM)
	if d <= 0 {
		return ctx, stopSignals
	}
	ctx, cancel := context.WithTimeout(ctx, d)
	return ctx, func() { cancel(); stopSignals() }
}

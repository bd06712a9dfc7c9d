// Command headroom forecasts metric series arriving on NATS and publishes
// forecasts and projected-breach events.
//
//	headroom serve    run the sidecar (embedded NATS server unless --nats is given)
//	headroom demo     run an invented fleet through an embedded server and print what happens
//	headroom replay   run the same engines over a CSV file and write JSON Lines
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

type command struct {
	name, summary string
	run           func(ctx context.Context, args []string, stdout, stderr io.Writer) error
}

func commands() []command {
	return []command{
		{"serve", "run the sidecar on NATS", runServe},
		{"demo", "run an invented fleet through an embedded server and print forecasts and breaches", runDemo},
		{"replay", "run the engines over a CSV file and write JSON Lines records", runReplay},
	}
}

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		usage(stderr)
		if len(args) == 0 {
			return 2
		}
		return 0
	}
	for _, c := range commands() {
		if c.name == args[0] {
			err := c.run(ctx, args[1:], stdout, stderr)
			switch {
			case err == nil:
				return 0
			case errors.Is(err, flag.ErrHelp):
				return 0
			case errors.Is(err, errUsage):
				return 2
			default:
				fmt.Fprintf(stderr, "headroom %s: %v\n", c.name, err)
				return 1
			}
		}
	}
	fmt.Fprintf(stderr, "headroom: unknown command %q\n\n", args[0])
	usage(stderr)
	return 2
}

var errUsage = errors.New("usage")

func usage(w io.Writer) {
	fmt.Fprintln(w, "headroom forecasts metric series on NATS and warns before they cross their limits.")
	fmt.Fprintln(w, "\nUsage: headroom <command> [flags]   (headroom <command> --help for its flags)")
	fmt.Fprintln(w, "\nCommands:")
	for _, c := range commands() {
		fmt.Fprintf(w, "  %-8s %s\n", c.name, c.summary)
	}
}

// Command longwave ingests resting-EEG recordings of memory-clinic visits,
// computes comparable markers under fixed, versioned settings, keeps each
// patient's visits in one SQLite file and serves their course on the web.
//
// Usage: longwave COMMAND [flags]; "longwave help" lists the commands and
// "longwave COMMAND --help" explains one. Exit status: 0 done, 1 failed,
// 2 wrong usage.
package main

import (
	"context"
	"os"
	"os/signal"
	"syscall"
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := Run(ctx, os.Args[1:], os.Stdin, os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

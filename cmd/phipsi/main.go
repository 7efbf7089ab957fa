// Command phipsi checks flow passages in ideal flow: it reads a scenario file, solves Laplace's
// equation for the stream function on a structured grid with the exact geometry, derives velocity
// and pressure by Bernoulli and writes the numbers, tables and pictures of a design review.
//
// Usage:
//
//	phipsi run SCENARIO.toml [--out DIR] [--spacing H] [--method M] [--tolerance T] [--with-error] [--quiet] [--json]
//	phipsi check SCENARIO.toml
//	phipsi converge SCENARIO.toml [--levels N] [--ratio R] [--out DIR]
//	phipsi version
//
// Exit status: 0 success, 1 any other failure, 2 bad command line, 3 invalid scenario, 4 the
// solver did not converge, 130 interrupted.
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"

	"phipsi/cmd/internal/scenario"
	"phipsi/solver"
)

// version is the program's version.
const version = "0.1.0"

// Exit statuses.
const (
	exitOK          = 0
	exitFailure     = 1
	exitUsage       = 2
	exitInvalid     = 3
	exitNotConverge = 4
	exitInterrupted = 130
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	err := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(exitStatus(err, os.Stderr))
}

// usageError is a bad command line.
type usageError struct{ msg string }

func (e *usageError) Error() string { return e.msg }

// helpShown means --help was asked for and printed: not an error.
var helpShown = errors.New("help shown")

// exitStatus prints err as one line and returns the exit status it calls for.
func exitStatus(err error, stderr io.Writer) int {
	if err == nil || errors.Is(err, helpShown) {
		return exitOK
	}
	fmt.Fprintf(stderr, "phipsi: %v\n", err)
	var se *scenario.Error
	var ue *usageError
	switch {
	case errors.Is(err, context.Canceled):
		return exitInterrupted
	case errors.As(err, &ue):
		return exitUsage
	case errors.As(err, &se):
		return exitInvalid
	case errors.Is(err, solver.ErrNotConverged):
		return exitNotConverge
	}
	return exitFailure
}

const topUsage = `phipsi: ideal-flow checks of flow passages

usage:
  phipsi run SCENARIO.toml [flags]     solve and write the summary, tables and pictures
  phipsi check SCENARIO.toml [flags]   validate, print the grid size and memory estimate
  phipsi converge SCENARIO.toml [flags]
                                       grid-convergence study: the key numbers on 3 grids,
                                       their observed order, extrapolation and error band
  phipsi version                       print the version

Run "phipsi COMMAND --help" for a command's flags.
`

// run is the whole program without the process around it.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	if len(args) == 0 {
		io.WriteString(stderr, topUsage)
		return &usageError{"no command given (run, check, converge or version)"}
	}
	switch args[0] {
	case "run":
		return runCmd(ctx, args[1:], stdout, stderr)
	case "check":
		return checkCmd(args[1:], stdout, stderr)
	case "converge":
		return convergeCmd(ctx, args[1:], stdout, stderr)
	case "version", "--version":
		fmt.Fprintf(stdout, "phipsi %s\n", version)
		return nil
	case "-h", "--help", "help":
		io.WriteString(stdout, topUsage)
		return nil
	}
	io.WriteString(stderr, topUsage)
	return &usageError{fmt.Sprintf("unknown command %q (run, check, converge or version)", args[0])}
}

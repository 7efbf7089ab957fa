package main

import (
	"bufio"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"

	"github.com/spf13/pflag"
)

// byteSize is a pflag value for memory sizes such as 512MiB, 4GiB or a plain number of bytes.
type byteSize int64

func (b *byteSize) String() string { return formatBytes(int64(*b)) }
func (b *byteSize) Type() string   { return "size" }
func (b *byteSize) Set(s string) error {
	v, err := parseBytes(s)
	if err != nil {
		return err
	}
	*b = byteSize(v)
	return nil
}

// parseBytes reads a size with an optional unit: B, KB, MB, GB (powers of 1000) or KiB, MiB, GiB,
// TiB (powers of 1024).
func parseBytes(s string) (int64, error) {
	t := strings.TrimSpace(s)
	units := []struct {
		suffix string
		mult   float64
	}{{"TiB", 1 << 40}, {"GiB", 1 << 30}, {"MiB", 1 << 20}, {"KiB", 1 << 10},
		{"TB", 1e12}, {"GB", 1e9}, {"MB", 1e6}, {"KB", 1e3}, {"B", 1}}
	mult := 1.0
	for _, u := range units {
		if strings.HasSuffix(t, u.suffix) {
			t, mult = strings.TrimSpace(strings.TrimSuffix(t, u.suffix)), u.mult
			break
		}
	}
	v, err := strconv.ParseFloat(t, 64)
	if err != nil || !(v > 0) || v*mult > 1<<62 {
		return 0, fmt.Errorf("size must be a positive number with an optional unit (B, KB, MB, GB, KiB, MiB, GiB, TiB), got %q", s)
	}
	return int64(v * mult), nil
}

func formatBytes(n int64) string {
	switch {
	case n >= 1<<30:
		return fmt.Sprintf("%.3g GiB", float64(n)/(1<<30))
	case n >= 1<<20:
		return fmt.Sprintf("%.3g MiB", float64(n)/(1<<20))
	}
	return fmt.Sprintf("%.3g KiB", float64(n)/(1<<10))
}

// defaultMaxMemory is half of physical memory (from /proc/meminfo), or 4 GiB where it is unknown.
func defaultMaxMemory() int64 {
	f, err := os.Open("/proc/meminfo")
	if err == nil {
		defer f.Close()
		sc := bufio.NewScanner(f)
		for sc.Scan() {
			var kb int64
			if n, _ := fmt.Sscanf(sc.Text(), "MemTotal: %d kB", &kb); n == 1 && kb > 0 {
				return kb * 1024 / 2
			}
		}
	}
	return 4 << 30
}

// newFlags returns a flag set for a subcommand that reports errors as usage errors and prints
// help to stdout.
func newFlags(name, usage string, stdout io.Writer) *pflag.FlagSet {
	fs := pflag.NewFlagSet(name, pflag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.Usage = func() {
		fmt.Fprintf(stdout, "usage: %s\n\nflags:\n%s", usage, fs.FlagUsages())
	}
	fs.SortFlags = false
	return fs
}

// parse parses args and returns the single positional scenario path.
func parse(fs *pflag.FlagSet, args []string) (string, error) {
	if err := fs.Parse(args); err != nil {
		if err == pflag.ErrHelp {
			return "", helpShown // pflag has printed the usage
		}
		return "", &usageError{fmt.Sprintf("%s: %v", fs.Name(), err)}
	}
	if fs.NArg() != 1 {
		return "", &usageError{fmt.Sprintf("%s: expected one scenario file, got %d arguments", fs.Name(), fs.NArg())}
	}
	return fs.Arg(0), nil
}

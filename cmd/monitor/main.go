// Command monitor reconciles measured and predicted member forces of a
// monitored steel truss. Each subcommand lives in its own file; main only
// dispatches.
package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"os/signal"
	"runtime/debug"
	"sort"
	"syscall"
)

// command is one subcommand: it gets its arguments (without the command
// name), the standard streams and a context cancelled on SIGINT/SIGTERM, and
// returns the process exit code.
type command struct {
	summary string
	run     func(ctx context.Context, args []string, stdout, stderr io.Writer) int
}

// commands lists every subcommand. It is built on each call so that the
// program holds no mutable global state.
func commands() map[string]command {
	return map[string]command{
		"check":       {"validate a structure file (and its sensor map) and print a summary", runCheck},
		"solve":       {"solve one load case and print member forces, displacements, reactions", runSolve},
		"import":      {"import a logger CSV file into the reading store", runImport},
		"deadletters": {"list the rejected payloads and readings (dead letters) in the store", runDeadLetters},
		"run":         {"run the monitoring service", runService},
		"replay":      {"replay a stored period through the pipeline into a report", runReplay},
		"simulate":    {"publish simulated logger readings to a broker", runSimulate},
		"demo":        {"self-contained demo: embedded broker, simulator, service, dashboard", runDemo},
		"rules":       {"write the alarm rules as a Prometheus alerting-rules file", runRules},
		"fatigue":     {"fatigue damage per gauge and projected remaining life from the store", runFatigue},
	}
}

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := dispatch(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// dispatch runs the subcommand named by args[0].
func dispatch(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	cmds := commands()
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		usage(stdout, cmds)
		if len(args) == 0 {
			return 2
		}
		return 0
	}
	if args[0] == "--version" || args[0] == "-version" || args[0] == "version" {
		fmt.Fprintln(stdout, version())
		return 0
	}
	c, ok := cmds[args[0]]
	if !ok {
		fmt.Fprintf(stderr, "monitor: unknown command %q; run \"monitor help\" for the list\n", args[0])
		return 2
	}
	return c.run(ctx, args[1:], stdout, stderr)
}

// plural is "1 structure" or "2 structures".
func plural(n int, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return fmt.Sprintf("%d %s", n, many)
}

// version is the module version and VCS revision the binary was built
// from, as recorded by the Go toolchain (runtime/debug build info).
func version() string {
	bi, ok := debug.ReadBuildInfo()
	if !ok {
		return "monitor (no build information)"
	}
	v := bi.Main.Version
	if v == "" {
		v = "(devel)"
	}
	out := "monitor " + bi.Main.Path + " " + v
	var rev, at, dirty string
	for _, s := range bi.Settings {
		switch s.Key {
		case "vcs.revision":
			rev = s.Value
		case "vcs.time":
			at = s.Value
		case "vcs.modified":
			if s.Value == "true" {
				dirty = ", modified"
			}
		}
	}
	if rev != "" {
		out += fmt.Sprintf(" (revision %s, %s%s)", rev, at, dirty)
	}
	return out + ", " + bi.GoVersion
}

func usage(w io.Writer, cmds map[string]command) {
	fmt.Fprintln(w, "usage: monitor COMMAND [flags]   (monitor --version prints the build)")
	fmt.Fprintln(w)
	names := make([]string, 0, len(cmds))
	for n := range cmds {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-11s %s\n", n, cmds[n].summary)
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, "This tool is a monitoring aid, not a safety verdict; decisions rest with a licensed engineer under local codes.")
}

// Command tpcscan is a terminal scanning station for LArTPC wire-plane
// events: display, hand-scanning campaigns, and agreement statistics.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"runtime/debug"
	"sort"
	"strings"
	"syscall"
)

// command is one subcommand. run gets the arguments after the command name.
type command struct {
	name    string
	summary string
	run     func(ctx context.Context, env *environ, args []string) error
}

// environ is what a command may touch of the outside world; tests fill it in.
type environ struct {
	stdin          io.Reader
	stdout, stderr io.Writer
	getenv         func(string) string
}

// commands lists every subcommand. Each lives in its own file.
func commands() []command {
	return []command{
		checkCommand(),
		viewCommand(),
		scanCommand(),
		agreeCommand(),
		efficiencyCommand(),
		consensusCommand(),
		demoScanCommand(),
		reportCommand(),
		validateCommand(),
		demoCommand(),
		campaignCommand(),
		exportCommand(),
		serveCommand(),
		migrateCommand(),
		adjudicateCommand(),
	}
}

// usageError is an error in how the command was called; main prints a hint.
type usageError struct{ msg string }

func (e usageError) Error() string { return e.msg }

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	env := &environ{stdin: os.Stdin, stdout: os.Stdout, stderr: os.Stderr, getenv: os.Getenv}
	err := run(ctx, env, os.Args[1:])
	stop()
	if err != nil {
		if !errors.Is(err, flag.ErrHelp) {
			fmt.Fprintln(os.Stderr, "tpcscan:", err)
			var ue usageError
			if errors.As(err, &ue) {
				fmt.Fprintln(os.Stderr, "run 'tpcscan help' for usage")
				os.Exit(2)
			}
			os.Exit(1)
		}
	}
}

// run dispatches to a subcommand. With no arguments it runs the default
// command: the scanning station on the built-in demo.
func run(ctx context.Context, env *environ, args []string) error {
	if len(args) == 0 {
		args = []string{defaultCommand}
	}
	name, rest := args[0], args[1:]
	switch name {
	case "help", "-h", "-help", "--help":
		if len(rest) > 0 {
			return run(ctx, env, []string{rest[0], "-h"})
		}
		printUsage(env.stdout)
		return nil
	case "version", "-version", "--version":
		fmt.Fprintln(env.stdout, "tpcscan", version())
		return nil
	}
	for _, c := range commands() {
		if c.name == name {
			return c.run(ctx, env, rest)
		}
	}
	return usageError{fmt.Sprintf("unknown command %q", name)}
}

// defaultCommand runs when tpcscan is started without arguments.
const defaultCommand = "scan"

func printUsage(w io.Writer) {
	fmt.Fprintln(w, "tpcscan: a hand-scanning station for LArTPC wire-plane events")
	fmt.Fprintln(w)
	fmt.Fprintln(w, "usage: tpcscan [COMMAND] [FLAGS] [ARGS]")
	fmt.Fprintln(w, "       tpcscan help COMMAND   (or tpcscan COMMAND -h) explains every flag")
	fmt.Fprintln(w)
	fmt.Fprintf(w, "With no command, tpcscan runs %q on the built-in demo.\n\n", defaultCommand)
	fmt.Fprintln(w, "commands:")
	cs := commands()
	sort.Slice(cs, func(i, j int) bool { return cs[i].name < cs[j].name })
	for _, c := range cs {
		fmt.Fprintf(w, "  %-12s %s\n", c.name, c.summary)
	}
}

// newFlags returns a flag set for a subcommand whose -h prints the summary,
// the argument synopsis and every flag.
func newFlags(env *environ, name, synopsis, summary string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(env.stderr)
	fs.Usage = func() {
		w := fs.Output()
		fmt.Fprintf(w, "usage: tpcscan %s %s\n\n%s\n", name, synopsis, summary)
		var any bool
		fs.VisitAll(func(*flag.Flag) { any = true })
		if any {
			fmt.Fprintln(w, "\nflags:")
			fs.PrintDefaults()
		}
	}
	return fs
}

func version() string {
	if bi, ok := debug.ReadBuildInfo(); ok {
		v := bi.Main.Version
		for _, s := range bi.Settings {
			if s.Key == "vcs.revision" && len(s.Value) >= 12 {
				v = strings.TrimSpace(v + " " + s.Value[:12])
			}
		}
		return v
	}
	return "(unknown)"
}

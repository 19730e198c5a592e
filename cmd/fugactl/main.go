// Command fugactl is the command-line client of the fugad phase-behaviour
// service. It converts engineering-unit inputs (°C, bar, kJ/mol, …) to the
// SI units of the wire contract, calls the service over gRPC, and prints
// readable tables, protojson for scripts (--json), and phase-envelope plots
// (SVG and PNG, drawn with gonum.org/v1/plot).
//
// Run "fugactl -h" for the commands, flags, units and exit codes, and
// "fugactl COMMAND -h" for one command.
//
// Results are engineering estimates from published equations of state with
// known limits; design of relief, flare and pressure systems must follow
// the applicable codes and be checked by licensed engineers.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"net"
	"os"
	"sort"
	"strings"
	"time"
)

// Exit codes.
const (
	exitOK     = 0 // the request succeeded (every item, for batch and stream)
	exitFailed = 1 // the request was sent and failed, or some items failed, or the server was unreachable
	exitUsage  = 2 // bad command line or input file: nothing was sent
)

// envAddr is the environment variable read for --addr.
const envAddr = "FUGACTL_ADDR"

// defaultAddr is the server address when neither --addr nor FUGACTL_ADDR
// is set.
const defaultAddr = "localhost:50051"

func main() {
	a := &app{stdin: os.Stdin, stdout: os.Stdout, stderr: os.Stderr, getenv: os.Getenv}
	os.Exit(a.run(os.Args[1:]))
}

// app is one invocation of fugactl: its streams, environment and global
// flags. Tests build one with their own streams and a dialer.
type app struct {
	stdin          io.Reader
	stdout, stderr io.Writer
	getenv         func(string) string
	// dialer, when set, replaces the network dial (tests use an in-memory
	// listener); the address is then passed through unresolved.
	dialer func(ctx context.Context, addr string) (net.Conn, error)

	g globals
	// cautioned records that the safety caution was printed.
	cautioned bool
	// failed records that an item of a batch or stream failed.
	failed bool
	// explicit holds the names of the flags given on the command line.
	explicit map[string]bool
}

// globals are the flags every command accepts, before or after its name.
type globals struct {
	addr       string
	timeout    time.Duration
	tls        bool
	ca         string
	cert       string
	key        string
	serverName string
	json       bool
	noCache    bool
}

// register adds the global flags to fs, with the current values as
// defaults, so that flags given before the command name survive.
func (g *globals) register(fs *flag.FlagSet) {
	fs.StringVar(&g.addr, "addr", g.addr, "server address host:port (env "+envAddr+")")
	fs.DurationVar(&g.timeout, "timeout", g.timeout, "deadline of the call (stream: of the whole session, when given)")
	fs.BoolVar(&g.tls, "tls", g.tls, "connect with TLS, verifying the server against the system roots (or --ca)")
	fs.StringVar(&g.ca, "ca", g.ca, "PEM file of the CA that signed the server certificate (implies --tls)")
	fs.StringVar(&g.cert, "cert", g.cert, "PEM client certificate for mutual TLS (implies --tls; needs --key)")
	fs.StringVar(&g.key, "key", g.key, "PEM private key of --cert")
	fs.StringVar(&g.serverName, "server-name", g.serverName, "TLS server name to verify, when it differs from the host of --addr")
	fs.BoolVar(&g.json, "json", g.json, "print the response as protojson (proto field names, fields in field-number order) instead of tables")
	fs.BoolVar(&g.noCache, "no-cache", g.noCache, "ask the server to skip its result cache (the answer is the same either way)")
}

// usageError is a problem with the command line or an input file; the
// request was not sent.
type usageError struct{ err error }

func (e usageError) Error() string { return e.err.Error() }
func (e usageError) Unwrap() error { return e.err }

// flagParseError is a flag error that the flag package has already
// reported (or a request for help, flag.ErrHelp).
type flagParseError struct{ err error }

func (e flagParseError) Error() string { return e.err.Error() }
func (e flagParseError) Unwrap() error { return e.err }

func usagef(format string, args ...any) error { return usageError{fmt.Errorf(format, args...)} }

// command is one subcommand.
type command struct {
	name    string
	summary string
	// usage is the text shown by "fugactl NAME -h" before the flag list.
	usage string
	// flags registers the command's flags and returns the function that
	// runs it with the remaining arguments.
	flags func(a *app, fs *flag.FlagSet) func(args []string) error
}

// commands lists the subcommands in the order the help shows them.
var commands = []*command{
	flashCommand,
	batchCommand,
	streamCommand,
	envelopeCommand,
	saturationCommand,
	fugacityCommand,
	modelsCommand,
	componentsCommand,
}

func findCommand(name string) *command {
	for _, c := range commands {
		if c.name == name {
			return c
		}
	}
	return nil
}

// run executes fugactl with args and returns the exit code.
func (a *app) run(args []string) int {
	a.g = globals{addr: defaultAddr, timeout: 30 * time.Second}
	if v := a.getenv(envAddr); v != "" {
		a.g.addr = v
	}
	root := flag.NewFlagSet("fugactl", flag.ContinueOnError)
	root.SetOutput(a.stderr)
	a.g.register(root)
	root.Usage = func() { a.mainUsage(a.stderr, root) }
	if err := root.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return exitOK
		}
		return exitUsage
	}
	rest := root.Args()
	if len(rest) == 0 {
		a.mainUsage(a.stderr, root)
		return exitUsage
	}
	name := rest[0]
	if name == "help" {
		if len(rest) > 1 {
			if c := findCommand(rest[1]); c != nil {
				fs := a.commandFlags(c)
				a.commandUsage(a.stdout, c, fs)
				return exitOK
			}
		}
		a.mainUsage(a.stdout, root)
		return exitOK
	}
	c := findCommand(name)
	if c == nil {
		fmt.Fprintf(a.stderr, "fugactl: unknown command %q; commands: %s (fugactl -h for help)\n", name, commandNames())
		return exitUsage
	}
	fs := flag.NewFlagSet("fugactl "+c.name, flag.ContinueOnError)
	fs.SetOutput(a.stderr)
	a.g.register(fs)
	runFn := c.flags(a, fs)
	fs.Usage = func() { a.commandUsage(a.stderr, c, fs) }
	if err := fs.Parse(rest[1:]); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return exitOK
		}
		return exitUsage
	}
	a.explicit = map[string]bool{}
	mark := func(f *flag.Flag) { a.explicit[f.Name] = true }
	root.Visit(mark)
	fs.Visit(mark)
	err := runFn(fs.Args())
	var ue usageError
	var fe flagParseError
	switch {
	case errors.Is(err, flag.ErrHelp):
		return exitOK
	case errors.As(err, &fe):
		return exitUsage
	case err == nil && a.failed:
		return exitFailed
	case err == nil:
		return exitOK
	case errors.As(err, &ue):
		fmt.Fprintf(a.stderr, "fugactl %s: %v\n(fugactl %s -h for help)\n", c.name, err, c.name)
		return exitUsage
	default:
		a.printError(c.name, err)
		return exitFailed
	}
}

// commandFlags returns a flag set with c's flags, for help output.
func (a *app) commandFlags(c *command) *flag.FlagSet {
	fs := flag.NewFlagSet("fugactl "+c.name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	a.g.register(fs)
	c.flags(a, fs)
	return fs
}

func commandNames() string {
	var n []string
	for _, c := range commands {
		n = append(n, c.name)
	}
	return strings.Join(n, ", ")
}

// globalFlagNames are the flags of globals, listed apart in the help.
var globalFlagNames = map[string]bool{
	"addr": true, "timeout": true, "tls": true, "ca": true, "cert": true, "key": true,
	"server-name": true, "json": true, "no-cache": true,
}

// printFlags prints the flags of fs for which keep is true, in name order,
// with aliases (flags sharing a usage text) on one line.
func printFlags(w io.Writer, fs *flag.FlagSet, keep func(name string) bool) {
	type entry struct {
		names []string
		f     *flag.Flag
	}
	byUsage := map[string]*entry{}
	var order []*entry
	fs.VisitAll(func(f *flag.Flag) {
		if !keep(f.Name) {
			return
		}
		if e, ok := byUsage[f.Usage]; ok {
			e.names = append(e.names, f.Name)
			return
		}
		e := &entry{names: []string{f.Name}, f: f}
		byUsage[f.Usage] = e
		order = append(order, e)
	})
	sort.SliceStable(order, func(i, j int) bool { return order[i].names[0] < order[j].names[0] })
	for _, e := range order {
		var parts []string
		for _, n := range e.names {
			dash := "--"
			if len(n) == 1 {
				dash = "-"
			}
			parts = append(parts, dash+n)
		}
		name, _ := flag.UnquoteUsage(e.f)
		head := strings.Join(parts, ", ")
		if name != "" {
			head += " " + name
		}
		def := ""
		if v := e.f.DefValue; v != "" && v != "false" && v != "0" && v != "[]" {
			def = fmt.Sprintf(" (default %s)", v)
		}
		_, usage := flag.UnquoteUsage(e.f)
		fmt.Fprintf(w, "  %s\n      %s%s\n", head, usage, def)
	}
}

func (a *app) mainUsage(w io.Writer, fs *flag.FlagSet) {
	fmt.Fprint(w, mainHelp)
	fmt.Fprintln(w, "\nCommands:")
	for _, c := range commands {
		fmt.Fprintf(w, "  %-11s %s\n", c.name, c.summary)
	}
	fmt.Fprintln(w, "\nGlobal flags (before or after the command name):")
	printFlags(w, fs, func(string) bool { return true })
	fmt.Fprint(w, unitsHelp)
	fmt.Fprint(w, mainExamples)
	fmt.Fprint(w, exitHelp)
	fmt.Fprintln(w, "\n"+cautionLong)
}

func (a *app) commandUsage(w io.Writer, c *command, fs *flag.FlagSet) {
	fmt.Fprintf(w, "fugactl %s: %s\n\n%s", c.name, c.summary, c.usage)
	fmt.Fprintln(w, "\nFlags:")
	printFlags(w, fs, func(n string) bool { return !globalFlagNames[n] })
	fmt.Fprintln(w, "\nGlobal flags: --addr, --timeout, --tls, --ca, --cert, --key, --server-name, --json, --no-cache (fugactl -h).")
	fmt.Fprint(w, exitHelp)
	fmt.Fprintln(w, "\n"+cautionLong)
}

const mainHelp = `fugactl — command-line client of the fugad phase-behaviour service.

Usage: fugactl [global flags] COMMAND [flags]
       fugactl help [COMMAND]

Every quantity is converted to SI before it is sent; the server only sees
kelvin, pascal, J/mol and so on. Tables are the default output; --json prints
the protojson of the response for scripts.
`

const unitsHelp = `
Fluid and feed (flash, batch, stream, envelope, saturation, fugacity):
  --fluid "methane=87, ethane=5.2, propane=2.4, n-butane=1.2, nitrogen=1.2, carbon-dioxide=3"
      components by data-bank id (see fugactl components) with their amounts.
      Amounts are mole percent when written with % or when they sum to about
      100, mole fractions when they sum to about 1; --basis percent|fraction
      says so explicitly. A sum within 2 % of the total is normalised (and the
      output says so); --normalise rescales any sum.
  --model PR76|PR78|SRK    required unless --fluid-file names a model
  --fluid-file FILE        a protojson fugad.v1.Fluid (user and pseudo-
                           components, k_ij overrides); --fluid then gives the
                           amounts of its components by id, in any order.

Units (a unit is required; case-insensitive; blanks allowed, e.g. "40 °C"):
  temperature   K, C or degC or °C, F or degF, R (Rankine)
  pressure      Pa, hPa, kPa, MPa, mbar, bar, bara, atm, psi, psia (absolute);
                barg, psig, kPag, MPag (gauge: the standard atmosphere,
                101325 Pa = 1.01325 bar = 14.696 psi, is added; local
                barometric pressure may differ by a few kPa)
  enthalpy, internal energy   J/mol, kJ/mol, kJ/kmol, J/kmol, MJ/kmol, Btu/lbmol
  entropy       J/(mol·K) (also J/mol/K, J/molK), kJ/(mol·K), kJ/(kmol·K), Btu/(lbmol·R)
  molar volume  m3/mol, m3/kmol, L/mol, dm3/mol, cm3/mol, mL/mol, ft3/lbmol
  vapour fraction  0…1, or 0 %…100 %
`

const mainExamples = `
Examples (the Kestrel Ridge gas plant and its streams are fictional):
  # Inlet separator of the Kestrel Ridge plant: 40 °C, 70 bar
  fugactl flash --model PR78 -T 40C -P 70bar \
    --fluid "nitrogen=1.2, carbon-dioxide=1.8, methane=87, ethane=5.2, propane=2.4, isobutane=0.7, n-butane=0.8, n-pentane=0.5, n-hexane=0.4"

  # Gas downstream of the inlet choke: isenthalpic flash at 25 barg
  fugactl flash --model PR78 --fluid-file kestrel-inlet.json --fluid "$KR_FEED" -P 25barg -H -79.2kJ/mol

  # Hydrocarbon dew point of the sales gas at 55 bar, and its phase envelope
  fugactl saturation dew --model PR78 --fluid "$KR_SALES" -P 55bar
  fugactl envelope --model PR78 --fluid "$KR_SALES" --plot kestrel-sales --point "40C,70bar" --point "5C,55bar"

  # Fugacity coefficients of the separator vapour with derivatives, as JSON
  fugactl --json fugacity --model SRK --fluid "$KR_SALES" -T 40C -P 70bar --root vapour --derivatives all

  # A day of separator readings, one flash each
  fugactl batch --model PR78 --fluid "$KR_FEED" --file separator-log.csv
  tail -f separator-readings.txt | fugactl stream --model PR78 --fluid "$KR_FEED" --warm-start

  fugactl components butane
  FUGACTL_ADDR=fugad.kestrel.example:443 fugactl --tls models
`

const exitHelp = `
Exit status: 0 success; 1 the request was sent and failed (or some items of a
batch or stream failed, or the server was unreachable); 2 usage error (bad
flag, unit, fluid string or input file: nothing was sent).
`

// cautionShort is printed once after every table output.
const cautionShort = "Caution: engineering estimates from published equations of state; not for the design of relief, flare or pressure systems. Follow the applicable codes and defer to licensed engineers."

// cautionLong is the caution of the help texts.
const cautionLong = `Caution: results are engineering estimates from published cubic equations
of state, with known limits (near-critical states, polar and associating
mixtures, hydrogen, very heavy fractions). They are not a basis for the
design of relief, flare or other pressure systems: follow the applicable
codes and have licensed engineers check any such design.`

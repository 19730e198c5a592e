package main

import (
	"bufio"
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"strings"
	"sync"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

var streamCommand = &command{
	name:    "stream",
	summary: "one flash session: states line by line from standard input (FlashStream)",
	usage: `Usage: <states> | fugactl stream --model M --fluid "..." [--columns T,P] [--warm-start]

Each input line is one state, as VAR=VALUE pairs separated by blanks, commas
or semicolons (values without blanks):
  T=40C P=70bar
  P=25barg H=-79.2kJ/mol
With --columns T,P a line holds just the values, in that order: "40C 70bar".
Blank lines and lines starting with # are skipped; a line that cannot be read
is reported on standard error and skipped (the session goes on).

All lines travel over one FlashStream; the first message carries the fluid.
Each answer is printed as it arrives, one line each, numbered by input line
(--json: one protojson FlashStreamResponse per line). States are sent as fast
as they are read. The server starts each state from the stream's previous
result (an implicit warm start, as a digital twin stepping through time
wants); --cold turns that off, so that every answer is byte-identical to a
unary flash of the same state. With --warm-start fugactl itself copies each
answer's warm_start into the next state, sending each state only after the
previous answer.

The session has no deadline unless --timeout is given explicitly.

Example (fictional Kestrel Ridge separator readings, one per minute):
  tail -f kr-separator.log | awk '{print "T=" $2 "C P=" $3 "bar"}' | \
    fugactl stream --model PR78 --fluid "$KR_FEED" --warm-start
`,
	flags: func(a *app, fs *flag.FlagSet) func([]string) error {
		var ff fluidFlags
		var so solverFlags
		var columns string
		var warm, cold bool
		ff.register(fs)
		so.register(fs)
		fs.StringVar(&columns, "columns", "", "meaning of the values of a line without names, e.g. T,P or P,H")
		fs.BoolVar(&warm, "warm-start", false, "send each state after the previous answer, carrying that answer's warm start")
		fs.BoolVar(&cold, "cold", false, "ask the server not to warm-start states from the stream's previous result")
		return func(args []string) error {
			if err := noArgs(args); err != nil {
				return err
			}
			fd, err := buildFeed(&ff, fs)
			if err != nil {
				return err
			}
			var cols []string
			if columns != "" {
				for _, c := range strings.FieldsFunc(columns, func(r rune) bool { return r == ',' || r == ' ' || r == ';' }) {
					k, ok := keyAliases[strings.ToLower(c)]
					if !ok {
						return usagef("--columns: unknown variable %q: want T, P, H, S, V, U or beta", c)
					}
					cols = append(cols, k)
				}
				if len(cols) != 2 {
					return usagef("--columns: want two variables (%s), got %d", specList, len(cols))
				}
			}
			if warm && cold {
				return usagef("--warm-start and --cold exclude each other")
			}
			return a.runStream(fd, so.options(), cols, warm, cold)
		}
	},
}

// parseStreamLine reads one stream line into specification fields.
func parseStreamLine(line string, cols []string) (map[string]string, error) {
	toks := strings.FieldsFunc(line, func(r rune) bool { return r == ' ' || r == '\t' || r == ',' || r == ';' })
	raw := map[string]string{}
	if cols != nil {
		if len(toks) != len(cols) {
			return nil, fmt.Errorf("%d values, want %d (%s)", len(toks), len(cols), strings.Join(cols, ", "))
		}
		for i, t := range toks {
			if strings.Contains(t, "=") {
				return nil, fmt.Errorf("value %q: with --columns a line holds values only", t)
			}
			raw[cols[i]] = t
		}
		return raw, nil
	}
	for _, t := range toks {
		k, v, ok := strings.Cut(t, "=")
		if !ok || k == "" || v == "" {
			return nil, fmt.Errorf("token %q: want VAR=VALUE, e.g. T=40C (or use --columns)", t)
		}
		if _, dup := raw[k]; dup {
			return nil, fmt.Errorf("%s given twice", k)
		}
		raw[k] = v
	}
	return canonFields(raw)
}

// streamPrinter prints answers as they arrive, with fixed-width columns
// (a tab-aligned table would wait for the end).
type streamPrinter struct {
	a     *app
	mu    sync.Mutex
	specs map[uint64]*fugadv1.FlashState
}

const streamRowFormat = "%-6s %-30s %9s %11s %8s %-15s %s\n"

func (p *streamPrinter) header() {
	if p.a.g.json {
		return
	}
	fmt.Fprintf(p.a.stdout, streamRowFormat, "line", "specification", "T °C", "P bar", "β", "phases", "status")
}

func (p *streamPrinter) remember(seq uint64, st *fugadv1.FlashState) {
	p.mu.Lock()
	p.specs[seq] = st
	p.mu.Unlock()
}

// answer prints one response and reports whether it was OK.
func (p *streamPrinter) answer(r *fugadv1.FlashStreamResponse) bool {
	st := status.FromProto(r.GetStatus())
	ok := st.Code() == codes.OK
	if p.a.g.json {
		_ = p.a.printJSONLine(r)
		return ok
	}
	p.mu.Lock()
	spec := p.specs[r.GetSequence()]
	delete(p.specs, r.GetSequence())
	p.mu.Unlock()
	res := r.GetResult()
	t, pr, beta := "", "", ""
	if res != nil {
		t, pr, beta = fixed(celsius(res.GetTemperatureK()), 2), num(bar(res.GetPressurePa()), 6), fixed(res.GetVapourFraction(), 5)
	}
	cell := "OK"
	if !ok {
		cell = codeName(st.Code())
	}
	fmt.Fprintf(p.a.stdout, streamRowFormat, fmt.Sprint(r.GetSequence()), shortSpec(spec), t, pr, beta, phaseSummary(res), cell)
	if !ok {
		fmt.Fprint(p.a.stdout, indent(statusText("  ", st, p.a.dialTarget()), "  "))
	}
	return ok
}

func indent(s, pre string) string {
	lines := strings.SplitAfter(s, "\n")
	for i, l := range lines {
		if l != "" && i > 0 {
			lines[i] = pre + l
		}
	}
	return strings.Join(lines, "")
}

// runStream runs one FlashStream session over the lines of standard input.
func (a *app) runStream(fd *feed, opts *fugadv1.SolverOptions, cols []string, warm, cold bool) error {
	client, done, err := a.connect()
	if err != nil {
		return err
	}
	defer done()
	ctx, cancel := context.WithCancel(context.Background())
	if a.explicit["timeout"] && a.g.timeout > 0 {
		ctx, cancel = context.WithTimeout(context.Background(), a.g.timeout)
	}
	defer cancel()
	stream, err := client.FlashStream(ctx)
	if err != nil {
		return err
	}
	pr := &streamPrinter{a: a, specs: map[uint64]*fugadv1.FlashState{}}
	pr.header()
	answers := make(chan *fugadv1.FlashStreamResponse, 1)
	recvErr := make(chan error, 1)
	var failed bool
	go func() {
		defer close(answers)
		for {
			r, err := stream.Recv()
			if err != nil {
				if errors.Is(err, io.EOF) {
					err = nil
				}
				recvErr <- err
				return
			}
			if !pr.answer(r) {
				failed = true
			}
			if warm {
				answers <- r
			}
		}
	}()
	sc := bufio.NewScanner(a.stdin)
	sc.Buffer(make([]byte, 64<<10), 1<<20)
	first := true
	var warmStart *fugadv1.WarmStart
	lineNo := uint64(0)
	sent := 0
	var badLines int
	var sendErr error
	for sc.Scan() {
		lineNo++
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		fields, err := parseStreamLine(line, cols)
		var st *fugadv1.FlashState
		if err == nil {
			st, _, err = buildState(fields, nil)
		}
		if err != nil {
			fmt.Fprintf(a.stderr, "fugactl stream: line %d skipped: %v\n", lineNo, err)
			badLines++
			continue
		}
		if warm && warmStart != nil {
			st.WarmStart = warmStart
		}
		req := &fugadv1.FlashStreamRequest{State: st, Sequence: lineNo, BypassCache: a.g.noCache, NoImplicitWarmStart: cold}
		if first {
			req.Fluid, req.MoleFractions, req.Options = fd.fluid, fd.comp.fractions, opts
			first = false
		}
		pr.remember(lineNo, st)
		if sendErr = stream.Send(req); sendErr != nil {
			break
		}
		sent++
		if warm {
			r, ok := <-answers
			if !ok {
				break
			}
			if ws := r.GetResult().GetWarmStart(); ws != nil {
				warmStart = proto.Clone(ws).(*fugadv1.WarmStart)
			}
		}
	}
	if err := sc.Err(); err != nil {
		fmt.Fprintf(a.stderr, "fugactl stream: reading standard input: %v\n", err)
		badLines++
	}
	_ = stream.CloseSend()
	if warm {
		for range answers {
		}
	}
	err = <-recvErr
	if err == nil && sendErr != nil && !errors.Is(sendErr, io.EOF) {
		err = sendErr
	}
	if failed || badLines > 0 {
		a.failed = true
	}
	if err != nil {
		return err
	}
	if !a.g.json {
		fmt.Fprintf(a.stdout, "%d state(s) sent", sent)
		if badLines > 0 {
			fmt.Fprintf(a.stdout, ", %d line(s) skipped", badLines)
		}
		fmt.Fprintln(a.stdout)
		a.caution()
	}
	return nil
}

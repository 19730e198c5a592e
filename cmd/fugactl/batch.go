package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

var batchCommand = &command{
	name:    "batch",
	summary: "flash many states of one fluid from a CSV or JSON file (FlashBatch)",
	usage: `Usage: fugactl batch --model M --fluid "..." --file STATES.csv|STATES.json|-

CSV: a header row names the columns: T, P, H, S, V, U, beta (or temperature,
pressure, enthalpy, entropy, volume, energy, vapour-fraction), optionally with
a unit in brackets, and optional columns "id" (a label) and "fluid" (a
composition string for that state, same names as --fluid, all of them).
With a unit in the header the cells are plain numbers; without one each cell
carries its unit. Each row uses the two specification cells it fills; rows may
mix specifications. Lines starting with # are comments.

  id,T [C],P [bar],H [kJ/mol]
  inlet 06:00,38.5,69.8,
  inlet 07:00,41.2,70.3,
  choke outlet,,25.0,-79.2

JSON: an array of objects with the same keys and string values with units:
  [{"id": "inlet 06:00", "T": "38.5C", "P": "69.8bar"},
   {"id": "choke outlet", "P": "25barg", "H": "-79.2kJ/mol"}]

The format follows the file extension (.csv, .json) or --format; "-" reads
standard input. The table has one row per state; failed states are listed
with their own error below it (one bad state never fails the others). --detail
prints the full flash table of every state.
`,
	flags: func(a *app, fs *flag.FlagSet) func([]string) error {
		var ff fluidFlags
		var so solverFlags
		var file, format string
		var detail bool
		ff.register(fs)
		so.register(fs)
		fs.StringVar(&file, "file", "", "file of states (CSV or JSON; - for standard input)")
		fs.StringVar(&format, "format", "", "csv or json (default: from the file extension)")
		fs.BoolVar(&detail, "detail", false, "print the full table of every state")
		return func(args []string) error {
			if err := noArgs(args); err != nil {
				return err
			}
			if file == "" {
				return usagef("--file is required")
			}
			fd, err := buildFeed(&ff, fs)
			if err != nil {
				return err
			}
			data, err := readInput(a, file)
			if err != nil {
				return usageError{err}
			}
			if format == "" {
				format = strings.TrimPrefix(strings.ToLower(filepath.Ext(file)), ".")
			}
			var rows []stateRow
			switch format {
			case "csv":
				rows, err = readStatesCSV(data)
			case "json":
				rows, err = readStatesJSON(data)
			default:
				return usagef("--format %q: want csv or json (or name the file .csv or .json)", format)
			}
			if err != nil {
				return usagef("%s: %w", file, err)
			}
			states := make([]*fugadv1.FlashState, len(rows))
			for i, r := range rows {
				if states[i], err = r.state(fd, &ff); err != nil {
					return usagef("%s: %s: %w", file, r.where, err)
				}
			}
			req := &fugadv1.FlashBatchRequest{Fluid: fd.fluid, MoleFractions: fd.comp.fractions, States: states, Options: so.options(), BypassCache: a.g.noCache}
			resp, err := unary(a, func(ctx context.Context, c fugadv1.FugadServiceClient) (*fugadv1.FlashBatchResponse, error) {
				return c.FlashBatch(ctx, req)
			})
			if err != nil {
				return err
			}
			for _, it := range resp.GetItems() {
				if codes.Code(it.GetStatus().GetCode()) != codes.OK {
					a.failed = true
				}
			}
			if len(resp.GetItems()) != len(states) {
				a.failed = true
				fmt.Fprintf(a.stderr, "fugactl batch: %d states sent, %d items received\n", len(states), len(resp.GetItems()))
			}
			if a.g.json {
				return a.printJSON(resp)
			}
			a.printBatch(fd, rows, states, resp, detail)
			a.caution()
			return nil
		}
	},
}

// readInput reads a file, or standard input for "-".
func readInput(a *app, name string) ([]byte, error) {
	if name == "-" {
		return io.ReadAll(a.stdin)
	}
	return os.ReadFile(name)
}

// stateRow is one state of a batch file before conversion.
type stateRow struct {
	where  string            // "line 3" or "state 2", for errors
	id     string            // the user's label, may be empty
	fields map[string]string // spec key → value with unit
	fluid  string            // per-state composition string, may be empty
}

// state converts the row; a per-state composition is mapped onto the
// feed's component order.
func (r *stateRow) state(fd *feed, ff *fluidFlags) (*fugadv1.FlashState, error) {
	var x []float64
	if r.fluid != "" {
		am, err := parseAmounts(r.fluid)
		if err != nil {
			return nil, fmt.Errorf("fluid: %w", err)
		}
		c, err := toComposition(am, ff.basis, ff.normalise)
		if err != nil {
			return nil, fmt.Errorf("fluid: %w", err)
		}
		if x, err = reorder(c, fd.comp.names); err != nil {
			return nil, fmt.Errorf("fluid: %w", err)
		}
	}
	st, _, err := buildState(r.fields, x)
	return st, err
}

// reorder maps a composition onto the given component order; every
// component must be named exactly once.
func reorder(c *composition, order []string) ([]float64, error) {
	idx := map[string]int{}
	for i, n := range c.names {
		idx[strings.ToLower(n)] = i
	}
	x := make([]float64, len(order))
	for i, n := range order {
		j, ok := idx[strings.ToLower(n)]
		if !ok {
			return nil, fmt.Errorf("no amount for %s (name every component of --fluid)", n)
		}
		x[i] = c.fractions[j]
		delete(idx, strings.ToLower(n))
	}
	for _, n := range c.names {
		if _, left := idx[strings.ToLower(n)]; left {
			return nil, fmt.Errorf("%s is not a component of --fluid", n)
		}
	}
	return x, nil
}

// headerRE splits a CSV header cell into a name and an optional unit in
// brackets or parentheses: "T [C]", "P(bar)", "H [kJ/mol]".
var headerRE = regexp.MustCompile(`^\s*([^\[\(]+?)\s*(?:[\[\(]\s*(.+?)\s*[\]\)])?\s*$`)

// readStatesCSV parses a CSV batch file.
func readStatesCSV(data []byte) ([]stateRow, error) {
	var lines [][]byte
	var lineNo []int
	for i, l := range bytes.Split(data, []byte("\n")) {
		t := bytes.TrimSpace(l)
		if len(t) == 0 || t[0] == '#' {
			continue
		}
		lines = append(lines, l)
		lineNo = append(lineNo, i+1)
	}
	if len(lines) == 0 {
		return nil, fmt.Errorf("empty file: want a header row and at least one state")
	}
	rd := csv.NewReader(bytes.NewReader(bytes.Join(lines, []byte("\n"))))
	rd.FieldsPerRecord = -1
	rd.TrimLeadingSpace = true
	recs, err := rd.ReadAll()
	if err != nil {
		return nil, err
	}
	type col struct{ key, unit string }
	var cols []col
	seen := map[string]bool{}
	for _, h := range recs[0] {
		m := headerRE.FindStringSubmatch(h)
		if m == nil {
			return nil, fmt.Errorf("line %d: header cell %q: want a name such as T, P or T [C]", lineNo[0], h)
		}
		name := strings.ToLower(m[1])
		key := name
		switch name {
		case "id", "name", "label":
			key = "id"
		case "fluid", "composition":
			key = "fluid"
		default:
			k, ok := keyAliases[name]
			if !ok {
				return nil, fmt.Errorf("line %d: unknown column %q: want T, P, H, S, V, U, beta, id or fluid", lineNo[0], h)
			}
			key = k
		}
		if seen[key] {
			return nil, fmt.Errorf("line %d: column %s given twice", lineNo[0], key)
		}
		seen[key] = true
		cols = append(cols, col{key, m[2]})
	}
	if len(recs) < 2 {
		return nil, fmt.Errorf("no states after the header")
	}
	var rows []stateRow
	for ri, rec := range recs[1:] {
		where := fmt.Sprintf("line %d", lineNo[ri+1])
		if len(rec) > len(cols) {
			return nil, fmt.Errorf("%s: %d cells, but the header has %d columns", where, len(rec), len(cols))
		}
		r := stateRow{where: where, fields: map[string]string{}}
		for ci, cell := range rec {
			cell = strings.TrimSpace(cell)
			if cell == "" {
				continue
			}
			c := cols[ci]
			switch c.key {
			case "id":
				r.id = cell
			case "fluid":
				r.fluid = cell
			default:
				if c.unit != "" {
					if _, err := strconv.ParseFloat(cell, 64); err != nil {
						return nil, fmt.Errorf("%s: column %s [%s]: cell %q must be a plain number (the header gives the unit)", where, c.key, c.unit, cell)
					}
					cell += c.unit
				}
				r.fields[c.key] = cell
			}
		}
		if r.id == "" {
			r.id = strconv.Itoa(ri + 1)
		}
		rows = append(rows, r)
	}
	return rows, nil
}

// readStatesJSON parses a JSON batch file: an array of objects.
func readStatesJSON(data []byte) ([]stateRow, error) {
	var objs []map[string]json.RawMessage
	dec := json.NewDecoder(bytes.NewReader(data))
	if err := dec.Decode(&objs); err != nil {
		return nil, fmt.Errorf("want a JSON array of objects such as {\"T\": \"40C\", \"P\": \"70bar\"}: %w", err)
	}
	if len(objs) == 0 {
		return nil, fmt.Errorf("no states in the array")
	}
	var rows []stateRow
	for i, o := range objs {
		where := fmt.Sprintf("state %d", i+1)
		r := stateRow{where: where, id: strconv.Itoa(i + 1)}
		raw := map[string]string{}
		for k, v := range o {
			var s string
			if err := json.Unmarshal(v, &s); err != nil {
				// Numbers are accepted where no unit is needed.
				var f float64
				if json.Unmarshal(v, &f) == nil && keyAliases[strings.ToLower(k)] == keyBeta {
					s = strconv.FormatFloat(f, 'g', -1, 64)
				} else {
					return nil, fmt.Errorf("%s: %q must be a string with a unit, e.g. \"40C\"", where, k)
				}
			}
			switch strings.ToLower(k) {
			case "id", "name", "label":
				r.id = s
			case "fluid", "composition":
				r.fluid = s
			default:
				raw[k] = s
			}
		}
		f, err := canonFields(raw)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", where, err)
		}
		r.fields = f
		rows = append(rows, r)
	}
	return rows, nil
}

// itemStatus is the status cell of a batch or stream row.
func itemStatus(s *status.Status) string {
	if s.Code() == codes.OK {
		return "OK"
	}
	return codeName(s.Code()) + " (see below)"
}

// printBatch prints the summary table and the errors of failed states.
func (a *app) printBatch(fd *feed, rows []stateRow, states []*fugadv1.FlashState, resp *fugadv1.FlashBatchResponse, detail bool) {
	a.printFeedNote(fd)
	items := resp.GetItems()
	fmt.Fprintf(a.stdout, "Batch of %d states\n\n", len(states))
	tw := table(a.stdout)
	writeSummaryHeader(tw)
	var failed []int
	for i, it := range items {
		st := status.FromProto(it.GetStatus())
		var spec *fugadv1.FlashState
		id := strconv.Itoa(i + 1)
		if i < len(states) {
			spec, id = states[i], rows[i].id
		}
		writeSummaryRow(tw, id, spec, it.GetResult(), itemStatus(st))
		if st.Code() != codes.OK {
			failed = append(failed, i)
		}
	}
	tw.Flush()
	if len(failed) > 0 {
		fmt.Fprintf(a.stdout, "\n%d of %d states failed:\n", len(failed), len(items))
		for _, i := range failed {
			id := strconv.Itoa(i + 1)
			if i < len(rows) {
				id = rows[i].id + " (" + rows[i].where + ")"
			}
			fmt.Fprint(a.stdout, statusText("state "+id+": ", status.FromProto(items[i].GetStatus()), a.dialTarget()))
		}
	}
	if detail {
		for i, it := range items {
			if it.GetResult() == nil || i >= len(rows) {
				continue
			}
			fmt.Fprintf(a.stdout, "\n— state %s: %s\n", rows[i].id, specText(states[i]))
			sf := fd
			if x := states[i].GetMoleFractions(); len(x) > 0 {
				// This state's own feed, in the fluid's component order.
				c := *fd.comp
				c.fractions = x
				sf = &feed{fluid: fd.fluid, comp: &c}
			}
			a.printFlash(sf, it.GetResult())
		}
	}
}

package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"sort"
	"strings"
	"text/tabwriter"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// jsonOptions render responses for --json: proto field names (as in the
// .proto files, with their unit suffixes), zero scalars included (a vapour
// fraction of 0 is an answer, not an absence), fields in field-number
// order.
var jsonOptions = protojson.MarshalOptions{UseProtoNames: true, EmitDefaultValues: true}

// marshalJSON renders m as protojson with a fixed layout: protojson's own
// whitespace is deliberately unstable between builds, so the bytes are
// re-laid with encoding/json (which keeps the field order). indent "" gives
// one line.
func marshalJSON(m proto.Message, indent string) ([]byte, error) {
	b, err := jsonOptions.Marshal(m)
	if err != nil {
		return nil, err
	}
	var out bytes.Buffer
	if indent == "" {
		err = json.Compact(&out, b)
	} else {
		err = json.Indent(&out, b, "", indent)
	}
	if err != nil {
		return nil, err
	}
	out.WriteByte('\n')
	return out.Bytes(), nil
}

// printJSON writes m indented, for a unary response.
func (a *app) printJSON(m proto.Message) error {
	b, err := marshalJSON(m, "  ")
	if err != nil {
		return fmt.Errorf("encoding the response: %w", err)
	}
	_, err = a.stdout.Write(b)
	return err
}

// printJSONLine writes m on one line, for one answer of a stream.
func (a *app) printJSONLine(m proto.Message) error {
	b, err := marshalJSON(m, "")
	if err != nil {
		return fmt.Errorf("encoding the response: %w", err)
	}
	_, err = a.stdout.Write(b)
	return err
}

// caution prints the short safety caution once, in table mode.
func (a *app) caution() {
	if a.g.json || a.cautioned {
		return
	}
	a.cautioned = true
	fmt.Fprintln(a.stdout, "\n"+cautionShort)
}

// table is a tab-aligned table with right-aligned numbers.
func table(w io.Writer) *tabwriter.Writer {
	return tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
}

// row writes cells separated by tabs and ends the line.
func row(w io.Writer, cells ...string) {
	fmt.Fprintln(w, strings.Join(cells, "\t")+"\t")
}

// num formats a number with sig significant digits, without exponent for
// moderate magnitudes.
func num(v float64, sig int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Sprint(v)
	}
	if v == 0 {
		return "0"
	}
	a := math.Abs(v)
	if a >= 1e-3 && a < 1e7 {
		digits := sig - 1 - int(math.Floor(math.Log10(a)))
		if digits < 0 {
			digits = 0
		}
		return fmt.Sprintf("%.*f", digits, v)
	}
	return fmt.Sprintf("%.*e", sig-1, v)
}

// fixed formats v with d decimals.
func fixed(v float64, d int) string { return fmt.Sprintf("%.*f", d, v) }

// tempText shows a temperature in K and °C.
func tempText(k float64) string {
	return fmt.Sprintf("%s K (%s °C)", fixed(k, 2), fixed(celsius(k), 2))
}

// presText shows a pressure in Pa (scaled) and bar.
func presText(pa float64) string {
	return fmt.Sprintf("%s MPa (%s bar)", num(pa/1e6, 6), num(bar(pa), 6))
}

// phaseName is the table label of a phase.
func phaseName(l fugadv1.PhaseLabel) string {
	switch l {
	case fugadv1.PhaseLabel_PHASE_LABEL_VAPOUR:
		return "vapour"
	case fugadv1.PhaseLabel_PHASE_LABEL_LIQUID:
		return "liquid"
	case fugadv1.PhaseLabel_PHASE_LABEL_AQUEOUS:
		return "aqueous"
	}
	return "phase"
}

// stageNames are the short names of solver stages in the report line.
var stageNames = map[fugadv1.SolverStage]string{
	fugadv1.SolverStage_SOLVER_STAGE_STABILITY:               "stability",
	fugadv1.SolverStage_SOLVER_STAGE_SUCCESSIVE_SUBSTITUTION: "substitution",
	fugadv1.SolverStage_SOLVER_STAGE_NEWTON:                  "Newton",
	fugadv1.SolverStage_SOLVER_STAGE_RACHFORD_RICE:           "Rachford–Rice",
	fugadv1.SolverStage_SOLVER_STAGE_STATE_FUNCTION:          "state function",
	fugadv1.SolverStage_SOLVER_STAGE_SATURATION:              "saturation",
	fugadv1.SolverStage_SOLVER_STAGE_ENVELOPE:                "envelope",
	fugadv1.SolverStage_SOLVER_STAGE_FUGACITY:                "ln φ",
}

var estimateNames = map[fugadv1.InitialEstimate]string{
	fugadv1.InitialEstimate_INITIAL_ESTIMATE_CORRELATION:         "correlation",
	fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START:          "warm start",
	fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START_REJECTED: "warm start rejected, full stability analysis",
}

// reportLine renders a solver report on one line: the stages in order with
// their iterations (✗ marks a stage that missed its own tolerance), then
// the counts, the start, the cache and the versions.
func reportLine(r *fugadv1.SolverReport) string {
	if r == nil {
		return "solver: no report"
	}
	var stages []string
	for _, s := range r.GetStages() {
		n := stageNames[s.GetStage()]
		if n == "" {
			n = s.GetStage().String()
		}
		mark := ""
		if !s.GetConverged() {
			mark = " ✗"
		}
		stages = append(stages, fmt.Sprintf("%s %d%s", n, s.GetIterations(), mark))
	}
	parts := []string{}
	if len(stages) > 0 {
		parts = append(parts, strings.Join(stages, " → "))
	}
	parts = append(parts, fmt.Sprintf("ln φ evaluations %d", r.GetLnPhiEvaluations()))
	conv := "converged"
	if !r.GetConverged() {
		conv = "NOT converged"
	}
	parts = append(parts, fmt.Sprintf("residual %.2g (%s)", r.GetFinalResidual(), conv))
	if q := r.GetInputQuantizationRelativeTolerance(); q != 0 {
		parts = append(parts, fmt.Sprintf("inputs quantised to %.2g relative", q))
	}
	if r.GetStabilityPhaseCount() > 0 || r.MinimumTangentPlaneDistance != nil {
		s := fmt.Sprintf("stability: %d phase(s)", r.GetStabilityPhaseCount())
		if r.MinimumTangentPlaneDistance != nil {
			s += fmt.Sprintf(", min TPD %.3g", r.GetMinimumTangentPlaneDistance())
		}
		parts = append(parts, s)
	}
	if e := estimateNames[r.GetInitialEstimate()]; e != "" {
		parts = append(parts, "start: "+e)
	}
	if r.GetFromCache() {
		parts = append(parts, "from cache")
	}
	if r.GetDataVersion() != "" || r.GetModelVersion() != "" {
		parts = append(parts, fmt.Sprintf("data %s, models %s", r.GetDataVersion(), r.GetModelVersion()))
	}
	return "solver: " + strings.Join(parts, " | ")
}

// codeHints say what a caller can do about each code.
var codeHints = map[codes.Code]string{
	codes.Unavailable:      "the server is unreachable, overloaded or shutting down; retry, preferably on another replica",
	codes.DeadlineExceeded: "the call took longer than its deadline; raise --timeout or simplify the request",
	codes.Unimplemented:    "the server validated the request but has no solver for this endpoint yet",
	codes.Aborted:          "the solver did not converge; the estimate below is not an answer (try another specification or a warm start)",
	codes.Internal:         "a defect in the server; please report it with the request (--json output of the same call helps)",
	codes.Unauthenticated:  "check --tls, --ca, --cert and --key",
}

// printError prints a failed call readably on stderr: the gRPC code, the
// message, the ErrorInfo reason and metadata, each BadRequest field
// violation as "field: reason", retry advice and a not-converged estimate.
// With --json the google.rpc.Status is also printed on stdout.
func (a *app) printError(cmd string, err error) {
	st, ok := status.FromError(err)
	if !ok {
		fmt.Fprintf(a.stderr, "fugactl %s: %v\n", cmd, err)
		return
	}
	fmt.Fprint(a.stderr, statusText("fugactl "+cmd+": ", st, a.dialTarget()))
	if a.g.json {
		if b, jerr := marshalJSON(st.Proto(), "  "); jerr == nil {
			_, _ = a.stdout.Write(b)
		}
	}
}

// statusText renders a status on several lines, each after the first
// indented by two spaces.
func statusText(prefix string, st *status.Status, target string) string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s%s", prefix, codeName(st.Code()))
	for _, d := range st.Details() {
		if ei, ok := d.(*errdetails.ErrorInfo); ok {
			fmt.Fprintf(&b, " (reason %s", ei.GetReason())
			if ei.GetDomain() != "" {
				fmt.Fprintf(&b, ", domain %s", ei.GetDomain())
			}
			b.WriteString(")")
		}
	}
	b.WriteString("\n")
	if m := st.Message(); m != "" {
		fmt.Fprintf(&b, "  %s\n", m)
	}
	for _, d := range st.Details() {
		switch d := d.(type) {
		case *errdetails.ErrorInfo:
			if len(d.GetMetadata()) > 0 {
				keys := make([]string, 0, len(d.GetMetadata()))
				for k := range d.GetMetadata() {
					keys = append(keys, k)
				}
				sort.Strings(keys)
				var kv []string
				for _, k := range keys {
					kv = append(kv, k+"="+d.GetMetadata()[k])
				}
				fmt.Fprintf(&b, "  metadata: %s\n", strings.Join(kv, ", "))
			}
		case *errdetails.BadRequest:
			fmt.Fprintf(&b, "  field violations:\n")
			for _, fv := range d.GetFieldViolations() {
				fmt.Fprintf(&b, "    %s: %s%s\n", fv.GetField(), fv.GetDescription(), flagHint(fv.GetField()))
			}
		case *errdetails.RetryInfo:
			if d.GetRetryDelay() != nil {
				fmt.Fprintf(&b, "  retry after %v\n", d.GetRetryDelay().AsDuration())
			}
		case *fugadv1.NotConvergedDetail:
			if d.GetResidual() == math.MaxFloat64 {
				fmt.Fprintf(&b, "  no estimate with a finite residual (tolerance %.3g)\n", d.GetTolerance())
			} else {
				fmt.Fprintf(&b, "  residual %.3g against tolerance %.3g\n", d.GetResidual(), d.GetTolerance())
			}
			if f := d.GetFlash(); f != nil {
				fmt.Fprintf(&b, "  best estimate (not an answer): T %s, P %s, vapour fraction %s\n", tempText(f.GetTemperatureK()), presText(f.GetPressurePa()), num(f.GetVapourFraction(), 5))
			}
			if s := d.GetSaturation(); s != nil {
				fmt.Fprintf(&b, "  best estimate (not an answer): T %s, P %s\n", tempText(s.GetTemperatureK()), presText(s.GetPressurePa()))
			}
			if d.GetReport() != nil {
				fmt.Fprintf(&b, "  %s\n", reportLine(d.GetReport()))
			}
		case *errdetails.DebugInfo, *errdetails.Help, *errdetails.LocalizedMessage:
			fmt.Fprintf(&b, "  %v\n", d)
		}
	}
	if h := codeHints[st.Code()]; h != "" {
		if st.Code() == codes.Unavailable {
			h += " (server " + target + ")"
		}
		fmt.Fprintf(&b, "  hint: %s\n", h)
	}
	return b.String()
}

// codeNames are the canonical names of the gRPC status codes
// (grpc/grpc doc/statuscodes.md), as printed in errors.
var codeNames = map[codes.Code]string{
	codes.OK: "OK", codes.Canceled: "CANCELLED", codes.Unknown: "UNKNOWN",
	codes.InvalidArgument: "INVALID_ARGUMENT", codes.DeadlineExceeded: "DEADLINE_EXCEEDED",
	codes.NotFound: "NOT_FOUND", codes.AlreadyExists: "ALREADY_EXISTS",
	codes.PermissionDenied: "PERMISSION_DENIED", codes.ResourceExhausted: "RESOURCE_EXHAUSTED",
	codes.FailedPrecondition: "FAILED_PRECONDITION", codes.Aborted: "ABORTED",
	codes.OutOfRange: "OUT_OF_RANGE", codes.Unimplemented: "UNIMPLEMENTED",
	codes.Internal: "INTERNAL", codes.Unavailable: "UNAVAILABLE", codes.DataLoss: "DATA_LOSS",
	codes.Unauthenticated: "UNAUTHENTICATED",
}

// codeName is the canonical upper-case name of a code.
func codeName(c codes.Code) string {
	if n, ok := codeNames[c]; ok {
		return n
	}
	return fmt.Sprintf("CODE_%d", uint32(c))
}

// fieldFlags maps the last element of a wire field path to the flag that
// sets it, so that an error names what the user typed.
var fieldFlags = map[string]string{
	"temperature_k":                   "-T",
	"pressure_pa":                     "-P",
	"molar_enthalpy_j_per_mol":        "-H",
	"molar_entropy_j_per_mol_k":       "-S",
	"molar_volume_m3_per_mol":         "-V",
	"molar_internal_energy_j_per_mol": "-U",
	"vapour_fraction":                 "--beta",
	"mole_fractions":                  "--fluid",
	"components":                      "--fluid",
	"model":                           "--model",
	"start_pressure_pa":               "--start-pressure",
	"maximum_pressure_pa":             "--max-pressure",
	"max_points":                      "--max-points",
	"tolerance":                       "--tolerance",
	"max_iterations":                  "--max-iterations",
	"root":                            "--root",
}

func flagHint(field string) string {
	last := field
	if i := strings.LastIndexByte(last, '.'); i >= 0 {
		last = last[i+1:]
	}
	if i := strings.IndexByte(last, '['); i >= 0 {
		last = last[:i]
	}
	if strings.HasPrefix(field, "fluid.components") {
		return " (--fluid / --fluid-file)"
	}
	if f, ok := fieldFlags[last]; ok {
		return " (" + f + ")"
	}
	return ""
}

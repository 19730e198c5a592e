package server

import (
	"fmt"
	"strconv"
	"strings"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/protoadapt"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// ErrorDomain is the domain of every google.rpc.ErrorInfo the server sends.
const ErrorDomain = "fugad"

// Reasons carried in google.rpc.ErrorInfo.reason.
const (
	ReasonInvalidRequest = "INVALID_REQUEST" // INVALID_ARGUMENT: a field is malformed
	ReasonUnknownComp    = "UNKNOWN_COMPONENT"
	ReasonLimitExceeded  = "LIMIT_EXCEEDED"  // INVALID_ARGUMENT: over a configured size limit
	ReasonOverloaded     = "OVERLOADED"      // UNAVAILABLE: the solver pool is full
	ReasonNotConverged   = "NOT_CONVERGED"   // ABORTED: a solver did not converge
	ReasonNotImplemented = "NOT_IMPLEMENTED" // UNIMPLEMENTED: no solver for this endpoint yet
	ReasonStreamIdle     = "STREAM_IDLE"     // DEADLINE_EXCEEDED: a stream stayed idle too long
	ReasonDeadline       = "DEADLINE_EXCEEDED"
	ReasonCancelled      = "CANCELLED"
	ReasonInternal       = "INTERNAL"        // INTERNAL: a defect
	ReasonNoCaloricData  = "NO_CALORIC_DATA" // FAILED_PRECONDITION: a component lacks Cp data
	ReasonShuttingDown   = "SHUTTING_DOWN"   // UNAVAILABLE: the server is draining
)

// violations collects google.rpc.BadRequest field violations. The zero
// value is ready to use.
type violations struct {
	list   []*errdetails.BadRequest_FieldViolation
	reason string // ErrorInfo reason; the most specific one seen wins
}

// add records that field (a path such as "fluid.components[2].id") is bad
// for the reason given by format and args.
func (v *violations) add(field, format string, args ...any) {
	v.list = append(v.list, &errdetails.BadRequest_FieldViolation{
		Field:       field,
		Description: fmt.Sprintf(format, args...),
	})
	if v.reason == "" {
		v.reason = ReasonInvalidRequest
	}
}

// limit records a violation of a configured limit.
func (v *violations) limit(field, format string, args ...any) {
	v.add(field, format, args...)
	v.reason = ReasonLimitExceeded
}

// unknownComponent records an unknown component id.
func (v *violations) unknownComponent(field, format string, args ...any) {
	v.add(field, format, args...)
	if v.reason == ReasonInvalidRequest {
		v.reason = ReasonUnknownComp
	}
}

// empty reports whether nothing was recorded.
func (v *violations) empty() bool { return len(v.list) == 0 }

// maxViolationsShown bounds the field violations of one status, so that a
// huge malformed batch cannot produce a huge error.
const maxViolationsShown = 100

// err returns the INVALID_ARGUMENT status for the recorded violations, or
// nil when there are none.
func (v *violations) err() error {
	if v.empty() {
		return nil
	}
	list := v.list
	msg := list[0].Field + ": " + list[0].Description
	if len(list) > 1 {
		msg += fmt.Sprintf(" (and %d more field violations)", len(list)-1)
	}
	if len(list) > maxViolationsShown {
		list = list[:maxViolationsShown]
	}
	return withDetails(codes.InvalidArgument, "invalid request: "+msg, v.reason, nil,
		&errdetails.BadRequest{FieldViolations: list})
}

// withDetails builds a status with an ErrorInfo of the given reason and the
// extra details. If attaching the details fails, the plain status is
// returned, as the grpc-go error_details example does.
func withDetails(code codes.Code, msg, reason string, meta map[string]string, details ...protoadapt.MessageV1) error {
	st := status.New(code, msg)
	all := make([]protoadapt.MessageV1, 0, len(details)+1)
	all = append(all, &errdetails.ErrorInfo{Reason: reason, Domain: ErrorDomain, Metadata: meta})
	all = append(all, details...)
	if ds, err := st.WithDetails(all...); err == nil {
		st = ds
	}
	return st.Err()
}

// errOverloaded is the status of a shed call.
func errOverloaded(method string) error {
	return withDetails(codes.Unavailable, "server overloaded: all solver slots are busy; retry, preferably on another replica",
		ReasonOverloaded, map[string]string{"method": method},
		&errdetails.RetryInfo{})
}

// notConverged is the status of a solver that stopped before meeting its
// tolerance, with the best estimate in detail.
func notConverged(what string, iterations int, residual float64, detail *fugadv1.NotConvergedDetail) error {
	return withDetails(codes.Aborted,
		fmt.Sprintf("%s did not converge after %d iterations (residual %.3g); the best estimate is attached, it is not an answer", what, iterations, residual),
		ReasonNotConverged, map[string]string{"stage": what}, detail)
}

// errNotImplemented is the status of an endpoint whose request is valid but
// for which this build has no solver.
func errNotImplemented(endpoint string) error {
	return withDetails(codes.Unimplemented,
		fmt.Sprintf("%s: the request is valid, but this server has no solver for it yet", endpoint),
		ReasonNotImplemented, map[string]string{"endpoint": endpoint})
}

// errInternal is the status of a defect. The message never leaks internals
// beyond a short description.
func errInternal(what string) error {
	return withDetails(codes.Internal, "internal error: "+what+"; please report it", ReasonInternal, nil)
}

// errStreamIdle ends an idle stream.
func errStreamIdle(idle string) error {
	return withDetails(codes.DeadlineExceeded, "stream idle for "+idle+"; open a new stream", ReasonStreamIdle, nil)
}

// fieldPath joins path elements with dots, skipping empty ones.
func fieldPath(parts ...string) string {
	var b strings.Builder
	for _, p := range parts {
		if p == "" {
			continue
		}
		if b.Len() > 0 && !strings.HasPrefix(p, "[") {
			b.WriteByte('.')
		}
		b.WriteString(p)
	}
	return b.String()
}

// index formats a repeated-field element path, e.g. index("states", 3) is
// "states[3]".
func index(field string, i int) string { return field + "[" + strconv.Itoa(i) + "]" }

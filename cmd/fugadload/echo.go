package main

import (
	"context"
	"net"
	"sync"
	"sync/atomic"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// keepPerKind bounds the responses kept per kind for the empty endpoint.
const keepPerKind = 64

// capture keeps a sample of fugad's successful answers, per kind, so that
// the empty endpoint can answer the same traffic with messages of the same
// shape and size. A nil *capture keeps nothing.
type capture struct {
	mu      sync.Mutex
	items   [numKinds][]*fugadv1.FlashBatchItem
	flashes [numKinds][]*fugadv1.FlashResponse
	sat     []*fugadv1.SaturationPointResponse
	env     []*fugadv1.PhaseEnvelopeResponse
	fug     []*fugadv1.FugacityCoefficientsResponse
}

// keep stores a copy of m in list, with its report's from_cache flag
// cleared: the empty endpoint has no cache.
func keep[T proto.Message](c *capture, list *[]T, m T, report func(T) *fugadv1.SolverReport) {
	if c == nil {
		return
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	if len(*list) < keepPerKind {
		m = proto.Clone(m).(T)
		if r := report(m); r != nil {
			r.FromCache = false
		}
		*list = append(*list, m)
	}
}

func (c *capture) item(k kind, it *fugadv1.FlashBatchItem) {
	if c != nil {
		keep(c, &c.items[k], it, func(m *fugadv1.FlashBatchItem) *fugadv1.SolverReport { return m.GetResult().GetReport() })
	}
}

func (c *capture) flash(k kind, r *fugadv1.FlashResponse) {
	if c != nil {
		keep(c, &c.flashes[k], r, func(m *fugadv1.FlashResponse) *fugadv1.SolverReport { return m.GetResult().GetReport() })
	}
}

func (c *capture) saturation(r *fugadv1.SaturationPointResponse) {
	if c != nil {
		keep(c, &c.sat, r, (*fugadv1.SaturationPointResponse).GetReport)
	}
}

func (c *capture) envelope(r *fugadv1.PhaseEnvelopeResponse) {
	if c != nil {
		keep(c, &c.env, r, (*fugadv1.PhaseEnvelopeResponse).GetReport)
	}
}

func (c *capture) fugacity(r *fugadv1.FugacityCoefficientsResponse) {
	if c != nil {
		keep(c, &c.fug, r, (*fugadv1.FugacityCoefficientsResponse).GetReport)
	}
}

// echoServer is the empty endpoint: the fugad service answered with no
// validation, no solve and no cache, by replaying captured fugad answers
// (the same messages, so the same encoded sizes) for each state of a
// request. The gRPC work — HTTP/2 framing, decoding the request, encoding
// the response — is the same as fugad's; the difference between the two
// runs is what fugad adds. A kind fugad never answered successfully is
// answered UNIMPLEMENTED here too, so both runs carry the same traffic.
type echoServer struct {
	fugadv1.UnimplementedFugadServiceServer
	c    *capture
	next atomic.Uint64
}

var _ fugadv1.FugadServiceServer = (*echoServer)(nil)

func pick[T any](s *echoServer, list []T) (T, bool) {
	var zero T
	if len(list) == 0 {
		return zero, false
	}
	return list[s.next.Add(1)%uint64(len(list))], true
}

func noAnswer(method string) error {
	return status.Errorf(codes.Unimplemented, "empty endpoint: fugad gave no successful %s answer to replay", method)
}

func specKind(st *fugadv1.FlashState) kind {
	if st.GetPh() != nil {
		return kindPH
	}
	return kindTP
}

func (s *echoServer) Flash(_ context.Context, req *fugadv1.FlashRequest) (*fugadv1.FlashResponse, error) {
	r, ok := pick(s, s.c.flashes[specKind(req.GetState())])
	if !ok {
		return nil, noAnswer("Flash")
	}
	return r, nil
}

func (s *echoServer) FlashBatch(_ context.Context, req *fugadv1.FlashBatchRequest) (*fugadv1.FlashBatchResponse, error) {
	states := req.GetStates()
	if len(states) == 0 {
		return nil, status.Error(codes.InvalidArgument, "no states")
	}
	list := s.c.items[specKind(states[0])]
	if len(list) == 0 {
		return nil, noAnswer("FlashBatch")
	}
	resp := &fugadv1.FlashBatchResponse{Items: make([]*fugadv1.FlashBatchItem, len(states))}
	for i := range states {
		resp.Items[i], _ = pick(s, list)
	}
	return resp, nil
}

func (s *echoServer) SaturationPoint(context.Context, *fugadv1.SaturationPointRequest) (*fugadv1.SaturationPointResponse, error) {
	r, ok := pick(s, s.c.sat)
	if !ok {
		return nil, noAnswer("SaturationPoint")
	}
	return r, nil
}

func (s *echoServer) PhaseEnvelope(context.Context, *fugadv1.PhaseEnvelopeRequest) (*fugadv1.PhaseEnvelopeResponse, error) {
	r, ok := pick(s, s.c.env)
	if !ok {
		return nil, noAnswer("PhaseEnvelope")
	}
	return r, nil
}

func (s *echoServer) FugacityCoefficients(context.Context, *fugadv1.FugacityCoefficientsRequest) (*fugadv1.FugacityCoefficientsResponse, error) {
	r, ok := pick(s, s.c.fug)
	if !ok {
		return nil, noAnswer("FugacityCoefficients")
	}
	return r, nil
}

// startEcho serves the empty endpoint on a loopback port; stop ends it.
func startEcho(c *capture) (addr string, stop func(), err error) {
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return "", nil, err
	}
	g := grpc.NewServer(grpc.MaxRecvMsgSize(maxMessageBytes), grpc.MaxSendMsgSize(maxMessageBytes))
	fugadv1.RegisterFugadServiceServer(g, &echoServer{c: c})
	done := make(chan struct{})
	go func() {
		defer close(done)
		_ = g.Serve(lis)
	}()
	return lis.Addr().String(), func() { g.Stop(); <-done }, nil
}

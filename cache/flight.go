package cache

import (
	"context"
	"runtime/debug"
	"sync"

	"golang.org/x/sync/singleflight"
)

// flight is one shared solve in progress. Its context is detached from every
// caller's cancellation (it keeps the first caller's values, such as a
// request-scoped logger) and is cancelled only when the solve finishes or
// when the last caller waiting on it has left.
type flight struct {
	ctx     context.Context
	cancel  context.CancelFunc
	waiters int // guarded by flightGroup.mu
}

// flightGroup collapses concurrent identical work on top of
// golang.org/x/sync/singleflight and adds what singleflight lacks: knowing,
// at the moment a caller joins, whether it leads or joins (so collapsed
// requests can be counted), and cancelling the shared work once nobody waits
// for it.
//
// Invariant, under mu: m[k] == f exactly when the singleflight call for k is
// f's. Flights are created and DoChan is called with mu held; a flight is
// removed from m together with g.Forget(k), also with mu held, either when
// its work returns or when its last waiter leaves. A caller that finds no
// flight therefore always starts a new singleflight call, and a caller that
// finds one always joins it.
type flightGroup struct {
	mu sync.Mutex
	m  map[string]*flight
	g  singleflight.Group
}

// join attaches the caller to the flight for k, starting one that runs work
// if none is in progress. Before starting one it calls found, which reports
// whether the result has meanwhile become available elsewhere (a cache
// entry stored by a flight that has just ended); then join starts nothing and
// returns a nil channel.
func (fg *flightGroup) join(parent context.Context, k string, found func() bool, work func(ctx context.Context) (any, error)) (f *flight, ch <-chan singleflight.Result, leader bool) {
	fg.mu.Lock()
	defer fg.mu.Unlock()
	f = fg.m[k]
	if f == nil {
		if found != nil && found() {
			return nil, nil, false
		}
		ctx, cancel := context.WithCancel(context.WithoutCancel(parent))
		f = &flight{ctx: ctx, cancel: cancel}
		if fg.m == nil {
			fg.m = make(map[string]*flight)
		}
		fg.m[k] = f
		leader = true
	}
	f.waiters++
	ch = fg.g.DoChan(k, func() (v any, err error) {
		defer func() {
			if r := recover(); r != nil {
				v, err = nil, &PanicError{Value: r, Stack: debug.Stack()}
			}
			fg.end(f, k)
		}()
		return work(f.ctx)
	})
	return f, ch, leader
}

// end retires f after its work has returned.
func (fg *flightGroup) end(f *flight, k string) {
	fg.mu.Lock()
	if fg.m[k] == f {
		delete(fg.m, k)
		fg.g.Forget(k)
	}
	fg.mu.Unlock()
	f.cancel()
}

// leave detaches a caller that stopped waiting before f's work returned. The
// last one to leave cancels the work and retires f, so a later identical
// request starts afresh instead of joining a cancelled solve.
func (fg *flightGroup) leave(f *flight, k string) {
	fg.mu.Lock()
	f.waiters--
	last := f.waiters == 0 && fg.m[k] == f
	if last {
		delete(fg.m, k)
		fg.g.Forget(k)
	}
	fg.mu.Unlock()
	if last {
		f.cancel()
	}
}

package auth

import (
	"sync"
	"time"
)

// Limits bound what one caller (a token's name, a client certificate's name, else a peer host, or a
// connection from loopback) may ask. Zero fields mean no limit.
type Limits struct {
	// RequestsPerSecond is the sustained rate of unary calls and of failed authentications; Burst is how many
	// may come at once.
	RequestsPerSecond float64
	Burst             int
	// Streams is how many streams (watches, point reads) may be open at once.
	Streams int
}

// maxCallers bounds the limiter's memory: callers idle for a full bucket are forgotten first.
const maxCallers = 4096

// limiter is a token bucket and a stream count per caller.
type limiter struct {
	lim     Limits
	now     func() time.Time
	mu      sync.Mutex
	callers map[string]*caller
}

type caller struct {
	tokens  float64
	last    time.Time
	streams int
}

func newLimiter(l Limits, now func() time.Time) *limiter {
	return &limiter{lim: l, now: now, callers: map[string]*caller{}}
}

// get returns the caller's state, making room when the table is full; nil when it cannot.
func (l *limiter) get(key string, now time.Time) *caller {
	c, ok := l.callers[key]
	if ok {
		return c
	}
	if len(l.callers) >= maxCallers {
		l.forgetIdle(now)
		if len(l.callers) >= maxCallers {
			return nil
		}
	}
	c = &caller{tokens: float64(l.lim.Burst), last: now}
	l.callers[key] = c
	return c
}

// forgetIdle drops callers with no open stream whose bucket has refilled: forgetting them changes nothing.
func (l *limiter) forgetIdle(now time.Time) {
	full := time.Duration(0)
	if l.lim.RequestsPerSecond > 0 {
		full = time.Duration(float64(l.lim.Burst) / l.lim.RequestsPerSecond * float64(time.Second))
	}
	for k, c := range l.callers {
		if c.streams == 0 && now.Sub(c.last) >= full {
			delete(l.callers, k)
		}
	}
}

// allow takes one token from the caller's bucket.
func (l *limiter) allow(key string) bool {
	if l.lim.RequestsPerSecond <= 0 {
		return true
	}
	l.mu.Lock()
	defer l.mu.Unlock()
	now := l.now()
	c := l.get(key, now)
	if c == nil {
		return false
	}
	c.tokens = min(float64(l.lim.Burst), c.tokens+now.Sub(c.last).Seconds()*l.lim.RequestsPerSecond)
	c.last = now
	if c.tokens < 1 {
		return false
	}
	c.tokens--
	return true
}

// openStream counts a stream of the caller; false when the caller has as many open as allowed.
func (l *limiter) openStream(key string) bool {
	if l.lim.Streams <= 0 {
		return true
	}
	l.mu.Lock()
	defer l.mu.Unlock()
	c := l.get(key, l.now())
	if c == nil || c.streams >= l.lim.Streams {
		return false
	}
	c.streams++
	return true
}

func (l *limiter) closeStream(key string) {
	if l.lim.Streams <= 0 {
		return
	}
	l.mu.Lock()
	defer l.mu.Unlock()
	if c, ok := l.callers[key]; ok && c.streams > 0 {
		c.streams--
	}
}

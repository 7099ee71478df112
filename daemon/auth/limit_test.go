package auth

import (
	"fmt"
	"testing"
	"time"
)

type fakeClock struct{ t time.Time }

func (c *fakeClock) now() time.Time { return c.t }

func TestLimiterRate(t *testing.T) {
	clk := &fakeClock{t: time.Unix(0, 0)}
	l := newLimiter(Limits{RequestsPerSecond: 10, Burst: 3}, clk.now)
	for i := range 3 {
		if !l.allow("a") {
			t.Fatalf("call %d of the burst refused", i)
		}
	}
	if l.allow("a") {
		t.Fatal("4th call of a burst of 3 allowed")
	}
	if !l.allow("b") {
		t.Fatal("another caller refused because of the first")
	}
	clk.t = clk.t.Add(100 * time.Millisecond) // one token at 10/s
	if !l.allow("a") || l.allow("a") {
		t.Fatal("after 0.1 s at 10/s exactly one more call should pass")
	}
	clk.t = clk.t.Add(time.Hour)
	n := 0
	for l.allow("a") {
		n++
	}
	if n != 3 {
		t.Fatalf("after a long pause %d calls passed, want the burst of 3", n)
	}
}

func TestLimiterStreams(t *testing.T) {
	l := newLimiter(Limits{Streams: 2}, time.Now)
	if !l.openStream("a") || !l.openStream("a") {
		t.Fatal("streams within the limit refused")
	}
	if l.openStream("a") {
		t.Fatal("a third stream allowed with a limit of 2")
	}
	l.closeStream("a")
	if !l.openStream("a") {
		t.Fatal("stream refused after one closed")
	}
}

func TestLimiterForgetsIdleCallers(t *testing.T) {
	clk := &fakeClock{t: time.Unix(0, 0)}
	l := newLimiter(Limits{RequestsPerSecond: 1, Burst: 1, Streams: 1}, clk.now)
	if !l.openStream("held") {
		t.Fatal("first stream refused")
	}
	for i := range maxCallers - 1 {
		if !l.allow(fmt.Sprint("peer", i)) {
			t.Fatalf("caller %d refused", i)
		}
	}
	if l.allow("newcomer") {
		t.Fatal("a caller beyond the table's size allowed while every bucket is in use")
	}
	clk.t = clk.t.Add(2 * time.Second) // every bucket has refilled
	if !l.allow("newcomer") {
		t.Fatal("newcomer refused after idle callers could be forgotten")
	}
	if len(l.callers) != 2 {
		t.Errorf("%d callers kept, want the one with an open stream and the newcomer", len(l.callers))
	}
}

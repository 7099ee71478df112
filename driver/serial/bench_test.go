//go:build linux

package serial_test

import (
	"context"
	"fmt"
	"sync/atomic"
	"testing"
	"time"

	"goniod/driver/serial"
	"goniod/sim"
	"goniod/sim/scpi"
)

// countingPort counts the bytes that cross the line in both directions.
type countingPort struct {
	serial.Port
	n *atomic.Int64
}

func (p countingPort) Read(b []byte) (int, error) {
	n, err := p.Port.Read(b)
	p.n.Add(int64(n))
	return n, err
}

func (p countingPort) Write(b []byte) (int, error) {
	n, err := p.Port.Write(b)
	p.n.Add(int64(n))
	return n, err
}

// BenchmarkPoint is one point of a coupled scan at zero dwell through the serial driver and the simulator on
// a pseudo-terminal: move both axes, count, check high voltage and interlock. The simulator runs at speed 1e7,
// so motion takes no time; what is left is software and protocol cost, and, when paced, the line itself.
//
// Metrics: bytes/point on the line (both ways); wire-µs/point, the time those bytes need at 10 bits a byte;
// x-wire, the time per point as a multiple of that wire-time limit (unpaced: against 115200 baud).
func BenchmarkPoint(b *testing.B) {
	for _, baud := range []int{0, 9600, 115200} {
		name := "unpaced"
		if baud > 0 {
			name = fmt.Sprintf("paced-%d", baud)
		}
		b.Run(name, func(b *testing.B) { benchPoint(b, baud) })
	}
}

func benchPoint(b *testing.B, baud int) {
	dev := startDevice(b, sim.Config{Seed: 1, Speed: 1e7, Watchdog: -1}, scpi.Options{Baud: baud})
	var bytes atomic.Int64
	open := func(s serial.Settings) (serial.Port, error) {
		p, err := serial.OpenPort(s)
		if err != nil {
			return nil, err
		}
		return countingPort{Port: p, n: &bytes}, nil
	}
	ctx := context.Background()
	drv, err := serial.Open(ctx, serial.DefaultProfile(), serial.Settings{Device: dev.link, Keepalive: time.Hour}, open, nil)
	if err != nil {
		b.Fatal(err)
	}
	defer drv.Close()
	if err := drv.SetHighVoltage(ctx, true); err != nil {
		b.Fatal(err)
	}
	target := map[string]float64{}
	point := func(i int) {
		theta := 20 + float64(i%200)*0.05 // a coupled scan from 20° by 0.05°, over and over
		target["theta"], target["twotheta"] = theta, 2*theta
		if _, err := drv.MoveAll(ctx, target); err != nil {
			b.Fatal(err)
		}
		if _, err := drv.Count(ctx, 0); err != nil {
			b.Fatal(err)
		}
		if st, err := drv.Status(ctx); err != nil || !st.HighVoltage {
			b.Fatalf("Status = %+v, %v", st, err)
		}
	}
	point(0)
	bytes.Store(0)
	i := 0
	for b.Loop() {
		point(i)
		i++
	}
	perPoint := float64(bytes.Load()) / float64(i)
	ref := baud
	if ref == 0 {
		ref = 115200
	}
	wire := perPoint * 10 / float64(ref) // seconds
	b.ReportMetric(perPoint, "bytes/point")
	b.ReportMetric(wire*1e6, "wire-µs/point")
	b.ReportMetric(b.Elapsed().Seconds()/float64(i)/wire, "x-wire")
}

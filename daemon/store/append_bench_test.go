package store

import (
	"fmt"
	"testing"

	goniodv1 "goniod/proto/goniod/v1"
)

// BenchmarkAppend is the store alone making points durable on this disk, with the points built beforehand:
// one point per Append (a write and an fsync each: the rate if every point were made durable on its own), and
// batches of 32 and 1,024 points per Append (the engine's group commit takes up to 1,024 at once). These are
// the limits the engine's durable acquisition rate is compared with.
//
// Metrics: points/s; fsync-µs, the time of one Append (write and fsync) of the batch.
func BenchmarkAppend(b *testing.B) {
	for _, batch := range []int{1, 32, 1024} {
		b.Run(fmt.Sprintf("batch=%d", batch), func(b *testing.B) {
			s, err := Open(b.TempDir(), discard)
			if err != nil {
				b.Fatal(err)
			}
			defer s.Close()
			id := create(b, s, 0)
			app, _, err := s.OpenAppender(id)
			if err != nil {
				b.Fatal(err)
			}
			defer app.Close()
			points := max(b.N, batch)
			ps := make([]*goniodv1.Point, points)
			for i := range ps {
				ps[i] = point(i)
			}
			b.ResetTimer()
			appends := 0
			for i := 0; i < points; i += batch {
				if err := app.Append(ps[i:min(i+batch, points)]...); err != nil {
					b.Fatal(err)
				}
				appends++
			}
			b.StopTimer()
			b.ReportMetric(float64(points)/b.Elapsed().Seconds(), "points/s")
			b.ReportMetric(b.Elapsed().Seconds()/float64(appends)*1e6, "fsync-µs")
			b.ReportMetric(0, "ns/op")
		})
	}
}

package client_test

import (
	"context"
	"errors"
	"fmt"
	"log"
	"os"
	"time"

	"goniod/client"
)

// A coupled θ–2θ scan of the demo scenario, followed to its end, then fetched as CSV.
func Example() {
	ctx := context.Background()
	c, err := client.New("127.0.0.1:7461")
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()

	s, err := c.Submit(ctx, client.ScanRequest{Kind: client.Coupled, From: 10, To: 55, Step: 0.1, Dwell: time.Second,
		Source: &client.Source{KV: 30, MA: 0.8}, Label: "LiF batch 7"})
	if err != nil {
		log.Fatal(err)
	}
	st, err := c.Watch(ctx, s.ID, 0)
	if err != nil {
		log.Fatal(err)
	}
	for ev := range st.C {
		if ev.Point != nil {
			theta, _ := ev.Point.Angle("theta")
			fmt.Printf("θ = %.2f°  %d counts\n", theta, ev.Point.Counts)
		}
		if ev.End {
			fmt.Println(s.ID, ev.Scan.State)
		}
	}
	if err := st.Err(); err != nil {
		log.Fatal(err)
	}
	f, err := os.Create("lif-batch7-30kv.csv")
	if err != nil {
		log.Fatal(err)
	}
	defer f.Close()
	if _, err := c.Fetch(ctx, s.ID, client.CSV, f); err != nil {
		log.Fatal(err)
	}
}

// Connecting to a daemon that requires TLS and a token, with retries while it restarts.
func ExampleNew() {
	c, err := client.New("bench-a.lab.internal:7461",
		client.WithTLS("lab-ca.pem", "", ""),
		client.WithToken(os.Getenv("GONIO_TOKEN")),
		client.WithTimeout(10*time.Second),
		client.WithRetries(5, 500*time.Millisecond))
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()
	st, err := c.State(context.Background())
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("%s: tube %g kV %g mA, link %s\n", st.Instrument, st.KV, st.MA, st.Link)
}

// A tube-voltage series from 12 to 30 kV, then the short-wavelength limit of each scan and Planck's constant.
func ExampleClient_SubmitSeries() {
	ctx := context.Background()
	c, err := client.New(client.DefaultAddr)
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()
	series, err := c.SubmitSeries(ctx, client.SeriesRequest{
		Scan: client.ScanRequest{Kind: client.Coupled, From: 4, To: 30, Step: 0.1, Dwell: time.Second, Label: "LiF batch 7"},
		Sources: []client.Source{{KV: 12, MA: 0.8}, {KV: 15, MA: 0.8}, {KV: 20, MA: 0.8}, {KV: 25, MA: 0.8},
			{KV: 30, MA: 0.8}},
	})
	if err != nil {
		log.Fatal(err)
	}
	for _, id := range series.ScanIDs {
		st, err := c.Watch(ctx, id, 0)
		if err != nil {
			log.Fatal(err)
		}
		for range st.C { // drain to the end of the scan
		}
		if err := st.Err(); err != nil {
			log.Fatal(err)
		}
	}
	limits, err := c.FitLimit(ctx, series.ScanIDs, true)
	if err != nil {
		log.Fatal(err)
	}
	for _, l := range limits.Limits {
		fmt.Printf("%s at %g kV: λmin = %.5f ± %.5f nm\n", l.ScanID, l.KV, l.WavelengthNM.Value, l.WavelengthNM.Err)
	}
	if h := limits.PlanckJs; h != nil {
		fmt.Printf("h = (%.3f ± %.3f)e-34 J s\n", h.Value*1e34, h.Err*1e34)
	}
}

// The emission lines of a stored scan, with their diffraction orders.
func ExampleClient_IdentifyLines() {
	c, err := client.New(client.DefaultAddr)
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()
	lines, err := c.IdentifyLines(context.Background(), "scan-000001", client.LineOptions{})
	if err != nil {
		log.Fatal(err)
	}
	for _, m := range lines.Matches {
		fmt.Printf("%s %s, n = %d: θ = %.4f ± %.4f° (expected %.4f°)\n", lines.Anode, m.Line, m.Order,
			m.Peak.CentreDeg.Value, m.Peak.CentreDeg.Err, m.ExpectedDeg)
	}
}

// Refusals name the field and the allowed range; the error wraps a sentinel for the kind of failure.
func ExampleFieldErrors() {
	c, err := client.New(client.DefaultAddr)
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()
	_, err = c.Submit(context.Background(), client.ScanRequest{Kind: client.Coupled, From: 10, To: 30, Step: -0.1,
		Dwell: time.Second})
	switch {
	case errors.Is(err, client.ErrInvalid):
		for _, f := range client.FieldErrors(err) {
			fmt.Printf("%s: %s\n", f.Field, f.Reason)
		}
	case errors.Is(err, client.ErrUnavailable):
		fmt.Println("goniod is not reachable:", err)
	case err != nil:
		log.Fatal(err)
	}
}

// The instrument's state every two seconds, until the context ends.
func ExampleClient_WatchState() {
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	c, err := client.New(client.DefaultAddr)
	if err != nil {
		log.Fatal(err)
	}
	defer c.Close()
	st, err := c.WatchState(ctx, 2*time.Second)
	if err != nil {
		log.Fatal(err)
	}
	for s := range st.C {
		fmt.Printf("%s  %.1f cps  queue %d\n", s.Time.Format(time.TimeOnly), s.Rate, s.QueueLength)
	}
	if err := st.Err(); err != nil && !errors.Is(err, context.DeadlineExceeded) {
		log.Fatal(err)
	}
}

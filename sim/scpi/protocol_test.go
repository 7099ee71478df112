package scpi

import (
	"bytes"
	"context"
	"flag"
	"os"
	"testing"
	"time"

	"goniod/driver/drivertest"
	"goniod/sim"
)

var update = flag.Bool("update", false, "rewrite the replies in testdata/protocol.txt from the simulator")

// epoch is the simulated start time of the test instruments.
var epoch = time.Date(2024, 5, 1, 9, 0, 0, 0, time.UTC)

// newInstrument is the demo instrument (Cu anode, LiF) on a manual clock.
func newInstrument(t testing.TB, cfg sim.Config) *sim.Instrument {
	t.Helper()
	if cfg.Seed == 0 {
		cfg.Seed = 3
	}
	in, err := sim.New(cfg, sim.NewManualClock(epoch))
	if err != nil {
		t.Fatal(err)
	}
	return in
}

// TestProtocolTranscript runs every command of the protocol, and every kind of error, through the handler
// and compares the replies with testdata/protocol.txt, the protocol's reference conversation.
func TestProtocolTranscript(t *testing.T) {
	const path = "testdata/protocol.txt"
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	tr, err := drivertest.ParseTranscript(path, f)
	f.Close()
	if err != nil {
		t.Fatal(err)
	}
	h := NewHandler(newInstrument(t, sim.Config{}))
	for i := range tr.Steps {
		st := &tr.Steps[i]
		got := []byte(h.Execute(context.Background(), st.Send) + "\n")
		if *update {
			st.Reply = got
			continue
		}
		if !bytes.Equal(got, st.Reply) {
			t.Errorf("%s:%d: > %s\n got  %q\n want %q", path, st.Line, st.Send, got, st.Reply)
		}
	}
	if *update {
		var b bytes.Buffer
		b.WriteString("# goniod's line protocol (docs/protocol.md): every command and every kind of error, against the\n" +
			"# simulator (Cu anode, LiF, seed 3, manual clock). Regenerate: go test ./sim/scpi -run TestProtocolTranscript -update\n")
		if err := tr.Format(&b); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
}

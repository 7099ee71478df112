package main

import (
	"context"
	"os"
	"testing"
	"time"

	"goniod/daemon/server/servertest"
)

func TestParseBench(t *testing.T) {
	out := `goos: linux
pkg: goniod/driver/serial
BenchmarkPoint/unpaced-2         	    9106	    328005 ns/op	        54.00 bytes/point	      4688 wire-µs/point	         0.06996 x-wire
BenchmarkPoint/paced-9600-2      	      52	  57967710 ns/op	        54.00 bytes/point	     56250 wire-µs/point	         1.031 x-wire
BenchmarkAppend/batch=1024         	   20000	      1744 fsync-µs	    573315 points/s
--- BENCH: BenchmarkPoint
BenchmarkBroken-2 	 12 	 fast ns/op
PASS
ok  	goniod/driver/serial	12.3s
`
	res := parseBench(out)
	for _, c := range []struct {
		name, unit string
		want       float64
	}{
		{"BenchmarkPoint/unpaced", "x-wire", 0.06996},
		{"BenchmarkPoint/unpaced", "ns/op", 328005},
		{"BenchmarkPoint/paced-9600", "wire-µs/point", 56250},
		{"BenchmarkAppend/batch=1024", "points/s", 573315},
	} {
		got, err := metric(res, c.name, c.unit)
		if err != nil || got != c.want {
			t.Errorf("%s %s = %v, %v; want %v", c.name, c.unit, got, err, c.want)
		}
	}
	if _, err := metric(res, "BenchmarkBroken", "ns/op"); err == nil {
		t.Error("a result line with a value that is not a number was read")
	}
	if len(res) != 3 {
		t.Errorf("%d results, want 3: %v", len(res), res)
	}
}

func TestParseProcessFiles(t *testing.T) {
	m, err := parseMemory("Name:\tgoniod\nVmPeak:\t 1253020 kB\nVmHWM:\t   30100 kB\nVmRSS:\t   25400 kB\n")
	if err != nil || m.RSS != 25400<<10 || m.Peak != 30100<<10 {
		t.Errorf("parseMemory = %+v, %v", m, err)
	}
	if _, err := parseMemory("VmRSS:\t25400 kB\n"); err == nil {
		t.Error("a status without VmHWM was read")
	}
	// The command name may hold spaces and parentheses; utime and stime are fields 14 and 15.
	cpu, err := parseCPU("4242 (go (bench) x) S 1 4242 4242 0 -1 4194560 1000 0 0 0 150 25 0 0 20 0 9 0 100 0 0")
	if err != nil || cpu != 175*clockTick {
		t.Errorf("parseCPU = %v, %v; want %v", cpu, err, 175*clockTick)
	}
	if _, err := parseCPU("4242 (goniod) S 1"); err == nil {
		t.Error("a short stat line was read")
	}
	n, err := parseGoroutines("# HELP go_goroutines Number of goroutines.\n# TYPE go_goroutines gauge\ngo_goroutines 15\ngo_threads 9\n")
	if err != nil || n != 15 {
		t.Errorf("parseGoroutines = %d, %v", n, err)
	}
}

func TestMachineDescription(t *testing.T) {
	mounts := `22 1 252:0 / / rw,relatime shared:1 - ext4 /dev/vda rw
30 22 0:26 / /tmp rw,nosuid shared:5 - tmpfs tmpfs rw
31 22 0:27 / /work/data rw shared:6 - xfs /dev/vdb rw`
	for dir, want := range map[string]string{
		"/work/main":      "ext4 on /dev/vda (/)",
		"/tmp/bench-1":    "tmpfs on tmpfs (/tmp)",
		"/work/data/x":    "xfs on /dev/vdb (/work/data)",
		"/work/datadir/x": "ext4 on /dev/vda (/)",
	} {
		if got := mountOf(mounts, dir); got != want {
			t.Errorf("mountOf(%s) = %q, want %q", dir, got, want)
		}
	}
	if got := cpuModel("processor\t: 0\nvendor_id\t: AuthenticAMD\nmodel name\t: AMD EPYC 9R14\n"); got != "AMD EPYC 9R14" {
		t.Errorf("cpuModel = %q", got)
	}
}

func TestFormats(t *testing.T) {
	for _, c := range []struct{ got, want string }{
		{count(1234567.4), "1,234,567"}, {count(999), "999"}, {count(1000), "1,000"},
		{times(0.8), "0.8×"}, {times(0.7977), "0.798×"}, {times(0.0071), "0.0071×"}, {times(36.14), "36.1×"}, {times(151.2), "151×"},
		{dur(4040 * time.Nanosecond), "4.04 µs"}, {dur(5710 * time.Microsecond), "5.71 ms"}, {dur(2 * time.Second), "2.00 s"},
		{dur(33200 * time.Nanosecond), "33.2 µs"}, {dur(999950 * time.Nanosecond), "1000 µs"}, {dur(58 * time.Millisecond), "58.0 ms"},
	} {
		if c.got != c.want {
			t.Errorf("got %q, want %q", c.got, c.want)
		}
	}
}

// A short soak against a daemon in this process: the soak's own checks must pass (no error, no lost point)
// and its figures must show that load was put on.
func TestShortSoak(t *testing.T) {
	d := servertest.Start(t)
	o := soakOptions{Duration: 2 * time.Second, Watchers: 20, Submitters: 2, Pollers: 2, WatchConns: 2,
		SimDwell: 50 * time.Second, MaxPoints: 40, Sample: 200 * time.Millisecond}
	r, err := soak(context.Background(), soakTarget{Addr: d.Addr, MetricsAddr: d.MetricsAddr, PID: os.Getpid()}, o, nil)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("%+v", *r)
	switch {
	case r.Errors > 0 || r.Lost > 0:
		t.Fatalf("%d errors, %d lost points: %v", r.Errors, r.Lost, r.FirstErrors)
	case r.Submitted == 0 || r.Watches == 0 || r.Polls == 0 || len(r.Memory) == 0:
		t.Fatalf("no load: %d scans, %d watches, %d polls, %d memory readings", r.Submitted, r.Watches, r.Polls, len(r.Memory))
	case r.Done+r.CancelledRunning+r.CancelledQueued != r.Submitted:
		t.Fatalf("%d scans submitted, %d done and %d cancelled", r.Submitted, r.Done, r.CancelledRunning+r.CancelledQueued)
	}
}

func TestMemoryGrowth(t *testing.T) {
	const mib = 1 << 20
	var ms []memory
	for _, v := range []int64{10, 12, 20, 20, 21, 20, 30, 30} {
		ms = append(ms, memory{RSS: v * mib})
	}
	scans := []int{0, 100, 200, 300, 400, 500, 600, 700}
	// quarters of two readings: the second's median (upper of 20, 20) is 20 MiB, the last's 30 MiB; the middles
	// of those quarters lie at readings 3 and 6, 300 scans apart.
	ratio, perScan := memoryGrowth(ms, scans)
	if ratio != 1.5 || perScan != 10*mib/300 {
		t.Errorf("memoryGrowth = %v, %d; want 1.5, %d", ratio, perScan, 10*mib/300)
	}
	if ratio, perScan := memoryGrowth(ms[:3], scans[:3]); ratio != 0 || perScan != 0 {
		t.Errorf("three readings: %v, %d; want nothing", ratio, perScan)
	}
}

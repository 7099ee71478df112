package main

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"time"
)

// machine describes where the bench ran.
type machine struct {
	CPUs                int
	CPU, Kernel         string
	Disk                string // filesystem and device of the directory the bench writes to
	Go                  string
	LoadBefore, LoadEnd string // /proc/loadavg: 1, 5 and 15 minute load averages
}

func describeMachine(ctx context.Context, root, dir string) machine {
	m := machine{CPUs: runtime.NumCPU(), CPU: "unknown", Kernel: "unknown", Disk: "unknown", LoadBefore: loadAverage()}
	if b, err := os.ReadFile("/proc/cpuinfo"); err == nil {
		m.CPU = cpuModel(string(b))
	}
	if b, err := os.ReadFile("/proc/sys/kernel/osrelease"); err == nil {
		m.Kernel = "Linux " + strings.TrimSpace(string(b))
	}
	if b, err := os.ReadFile("/proc/self/mountinfo"); err == nil {
		m.Disk = mountOf(string(b), dir)
	}
	cmd := exec.CommandContext(ctx, "go", "version")
	cmd.Dir = root
	if b, err := cmd.Output(); err == nil {
		m.Go = strings.TrimSpace(string(b))
	}
	return m
}

// cpuModel is the first "model name" of /proc/cpuinfo.
func cpuModel(cpuinfo string) string {
	for _, line := range strings.Split(cpuinfo, "\n") {
		if k, v, ok := strings.Cut(line, ":"); ok && strings.TrimSpace(k) == "model name" {
			return strings.TrimSpace(v)
		}
	}
	return "unknown"
}

// mountOf finds the mount that holds dir in the text of /proc/self/mountinfo: "ext4 on /dev/vda (/)".
func mountOf(mountinfo, dir string) string {
	dir, _ = filepath.Abs(dir)
	best, desc := -1, "unknown"
	for _, line := range strings.Split(mountinfo, "\n") {
		pre, post, ok := strings.Cut(line, " - ")
		f, g := strings.Fields(pre), strings.Fields(post)
		if !ok || len(f) < 5 || len(g) < 2 {
			continue
		}
		point := f[4]
		if (dir == point || strings.HasPrefix(dir, strings.TrimSuffix(point, "/")+"/")) && len(point) > best {
			best, desc = len(point), fmt.Sprintf("%s on %s (%s)", g[0], g[1], point)
		}
	}
	return desc
}

func loadAverage() string {
	b, err := os.ReadFile("/proc/loadavg")
	if err != nil {
		return "unknown"
	}
	f := strings.Fields(string(b))
	if len(f) < 3 {
		return "unknown"
	}
	return strings.Join(f[:3], " ")
}

// quantile returns the q-quantile of ds (nearest rank) without changing ds; 0 when ds is empty.
func quantile(ds []time.Duration, q float64) time.Duration {
	if len(ds) == 0 {
		return 0
	}
	s := slices.Clone(ds)
	slices.Sort(s)
	return s[min(len(s)-1, int(q*float64(len(s))))]
}

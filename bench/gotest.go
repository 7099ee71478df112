package main

import (
	"bufio"
	"bytes"
	"context"
	"fmt"
	"os/exec"
	"strconv"
	"strings"
)

// benchResult is one benchmark's metrics by unit ("points/s", "x-wire", "ns/op"…).
type benchResult map[string]float64

// goBench runs the package benchmarks matching pattern in pkg (no tests) and returns their metrics by name,
// without the GOMAXPROCS suffix: "BenchmarkPoint/paced-9600".
func goBench(ctx context.Context, root, pkg, pattern, benchtime string) (map[string]benchResult, error) {
	cmd := exec.CommandContext(ctx, "go", "test", "-run", "^$", "-bench", pattern, "-benchtime", benchtime, "-count", "1", pkg)
	cmd.Dir = root
	var out bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &out
	if err := cmd.Run(); err != nil {
		return nil, fmt.Errorf("go test -bench %s %s: %w\n%s", pattern, pkg, err, out.String())
	}
	res := parseBench(out.String())
	if len(res) == 0 {
		return nil, fmt.Errorf("go test -bench %s %s: no benchmark ran\n%s", pattern, pkg, out.String())
	}
	return res, nil
}

// parseBench reads the result lines of `go test -bench`: a name, the iteration count, then value–unit pairs.
func parseBench(out string) map[string]benchResult {
	res := map[string]benchResult{}
	sc := bufio.NewScanner(strings.NewReader(out))
	for sc.Scan() {
		f := strings.Fields(sc.Text())
		if len(f) < 4 || !strings.HasPrefix(f[0], "Benchmark") || len(f)%2 != 0 {
			continue
		}
		if _, err := strconv.Atoi(f[1]); err != nil {
			continue
		}
		name := f[0]
		if i := strings.LastIndexByte(name, '-'); i > 0 {
			if _, err := strconv.Atoi(name[i+1:]); err == nil {
				name = name[:i]
			}
		}
		r := benchResult{}
		for k := 2; k+1 < len(f); k += 2 {
			v, err := strconv.ParseFloat(f[k], 64)
			if err != nil {
				r = nil
				break
			}
			r[f[k+1]] = v
		}
		if r != nil {
			res[name] = r
		}
	}
	return res
}

// metric returns one metric of one benchmark, or an error naming what is missing.
func metric(res map[string]benchResult, name, unit string) (float64, error) {
	r, ok := res[name]
	if !ok {
		return 0, fmt.Errorf("benchmark %s did not run", name)
	}
	v, ok := r[unit]
	if !ok {
		return 0, fmt.Errorf("benchmark %s reported no %s", name, unit)
	}
	return v, nil
}

package driver

import (
	"context"
	"fmt"
	"log/slog"
	"sort"
)

// Params is what a driver gets when it is opened.
type Params struct {
	// Decode fills v (a pointer to the driver's own settings struct) from the driver's section of the
	// daemon configuration. It reports unknown fields as errors.
	Decode func(v any) error
	// Logger for the driver's own messages; never nil.
	Logger *slog.Logger
}

// Opener opens an instrument. The context bounds the opening only, not the instrument's life.
type Opener func(ctx context.Context, p Params) (Instrument, error)

// registry maps driver names to openers. It is written only by Register from init functions, before main
// runs, and read afterwards; the compiled-in set is listed in one file of cmd/goniod.
var registry = map[string]Opener{}

// Register makes a driver available by name. It panics on an empty or duplicate name: both are programming
// errors found at start.
func Register(name string, open Opener) {
	if name == "" || open == nil {
		panic("driver: Register with empty name or nil opener")
	}
	if _, dup := registry[name]; dup {
		panic(fmt.Sprintf("driver: Register called twice for %q", name))
	}
	registry[name] = open
}

// Open opens the named driver.
func Open(ctx context.Context, name string, p Params) (Instrument, error) {
	open, ok := registry[name]
	if !ok {
		return nil, fmt.Errorf("driver %q is not compiled in (have: %v)", name, Names())
	}
	if p.Logger == nil {
		p.Logger = slog.New(slog.DiscardHandler)
	}
	if p.Decode == nil {
		p.Decode = func(any) error { return nil }
	}
	inst, err := open(ctx, p)
	if err != nil {
		return nil, fmt.Errorf("open driver %q: %w", name, err)
	}
	return inst, nil
}

// Names lists the registered drivers, sorted.
func Names() []string {
	names := make([]string, 0, len(registry))
	for n := range registry {
		names = append(names, n)
	}
	sort.Strings(names)
	return names
}

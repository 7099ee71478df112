// Package auth decides who may call what on goniod's gRPC API, and how often: bearer tokens from a tokens file
// with the roles viewer, operator and admin, a per-caller rate limit, and an audit log line for every control
// action. Tokens are compared in constant time and never logged.
package auth

import (
	"context"
	"fmt"
)

// Role is what a caller may do. Each role may do everything the roles below it may.
type Role int

const (
	// Public calls need no token (the standard health check).
	Public Role = iota
	// Viewer reads: instrument state, watches, scan records and points, analysis without saving.
	Viewer
	// Operator controls the instrument: scans, queue operations, moves, the X-ray source, single counts,
	// saving analysis results.
	Operator
	// Admin changes the stored instrument configuration (alignment offsets stored in it).
	Admin
)

var roleNames = map[Role]string{Public: "public", Viewer: "viewer", Operator: "operator", Admin: "admin"}

func (r Role) String() string {
	if s, ok := roleNames[r]; ok {
		return s
	}
	return fmt.Sprintf("role(%d)", int(r))
}

// ParseRole reads a role name of a tokens file.
func ParseRole(s string) (Role, error) {
	for _, r := range []Role{Viewer, Operator, Admin} {
		if s == r.String() {
			return r, nil
		}
	}
	return 0, fmt.Errorf("unknown role %q (use viewer, operator or admin)", s)
}

// Identity is an authenticated caller.
type Identity struct {
	// Name is the token's NAME column, the client certificate's common name, or "anonymous".
	Name string
	Role Role
	// Via says how the caller was identified: "token", "certificate" or "none" (no tokens file).
	Via string
}

type identityKey struct{}

// WithIdentity returns a context carrying id.
func WithIdentity(ctx context.Context, id Identity) context.Context {
	return context.WithValue(ctx, identityKey{}, id)
}

// FromContext returns the caller's identity, set by the Guard's interceptors.
func FromContext(ctx context.Context) (Identity, bool) {
	id, ok := ctx.Value(identityKey{}).(Identity)
	return id, ok
}

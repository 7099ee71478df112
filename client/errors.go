package client

import (
	"errors"
	"io"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
)

// Sentinel errors; every error of a call wraps one of these (errors.Is) or is a transport error.
var (
	// ErrInvalid: the request was refused; FieldErrors says which fields.
	ErrInvalid = errors.New("invalid request")
	// ErrNotFound: no such scan, series or result.
	ErrNotFound = errors.New("not found")
	// ErrRefused: not allowed now (a scan runs, the scan's state does not allow it, the interlock is open).
	ErrRefused = errors.New("refused in the present state")
	// ErrUnavailable: the daemon or the instrument link is not reachable.
	ErrUnavailable = errors.New("unavailable")
	// ErrUnauthenticated: no or an unknown token.
	ErrUnauthenticated = errors.New("unauthenticated")
	// ErrPermissionDenied: the token's role may not do this.
	ErrPermissionDenied = errors.New("permission denied")
	// ErrUnimplemented: the daemon does not offer this call.
	ErrUnimplemented = errors.New("not implemented by this daemon")
	// ErrCanceled: the call's context ended.
	ErrCanceled = errors.New("canceled")
)

var errEndOfStream = io.EOF

func isEOF(err error) bool { return errors.Is(err, io.EOF) }

// FieldError is one refused field of a request.
type FieldError struct {
	Field, Reason string
}

// Error is a call's error: the daemon's message, the sentinel it maps to and, for ErrInvalid, the fields.
type Error struct {
	Kind    error
	Code    codes.Code
	Message string
	Fields  []FieldError
}

func (e *Error) Error() string { return e.Message }

// Unwrap makes errors.Is(err, client.ErrInvalid) and friends work.
func (e *Error) Unwrap() error { return e.Kind }

// FieldErrors returns the refused fields of an ErrInvalid error.
func FieldErrors(err error) []FieldError {
	var e *Error
	if errors.As(err, &e) {
		return e.Fields
	}
	return nil
}

var codeKinds = map[codes.Code]error{
	codes.InvalidArgument: ErrInvalid, codes.OutOfRange: ErrInvalid, codes.NotFound: ErrNotFound,
	codes.FailedPrecondition: ErrRefused, codes.Aborted: ErrRefused, codes.Unavailable: ErrUnavailable,
	codes.Unauthenticated: ErrUnauthenticated, codes.PermissionDenied: ErrPermissionDenied,
	codes.Unimplemented: ErrUnimplemented, codes.Canceled: ErrCanceled, codes.DeadlineExceeded: ErrUnavailable,
	codes.ResourceExhausted: ErrRefused,
}

// mapError turns a gRPC status into an *Error wrapping a sentinel.
func mapError(err error) error {
	if err == nil {
		return nil
	}
	st, ok := status.FromError(err)
	if !ok {
		return err
	}
	kind, known := codeKinds[st.Code()]
	if !known {
		kind = errors.New(st.Code().String())
	}
	e := &Error{Kind: kind, Code: st.Code(), Message: st.Message()}
	for _, d := range st.Details() {
		if br, ok := d.(*errdetails.BadRequest); ok {
			for _, v := range br.GetFieldViolations() {
				e.Fields = append(e.Fields, FieldError{Field: v.GetField(), Reason: v.GetDescription()})
			}
		}
	}
	return e
}

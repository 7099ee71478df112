// Package validate holds the error type every input check in the daemon returns: the field that is wrong and
// what is allowed, so that the API can answer InvalidArgument with field details and users can fix the request.
package validate

import (
	"errors"
	"fmt"
	"math"
	"strings"
)

// FieldError says which field of a request is wrong and what it allows.
type FieldError struct {
	// Field is the request path, e.g. "coupled.step_deg".
	Field string
	// Reason says what is wrong and what is allowed, e.g. "-0.1 must be > 0 and at least the axis resolution 0.001".
	Reason string
}

func (e *FieldError) Error() string { return e.Field + ": " + e.Reason }

// Errors is a list of field errors; it is an error when non-empty.
type Errors []*FieldError

func (es Errors) Error() string {
	parts := make([]string, len(es))
	for i, e := range es {
		parts[i] = e.Error()
	}
	return strings.Join(parts, "; ")
}

// Err returns nil for no errors, else es.
func (es Errors) Err() error {
	if len(es) == 0 {
		return nil
	}
	return es
}

// Add appends a field error.
func (es *Errors) Add(field, format string, args ...any) {
	*es = append(*es, &FieldError{Field: field, Reason: fmt.Sprintf(format, args...)})
}

// Fields extracts the field errors of err (a FieldError, an Errors, or a wrapper of either).
func Fields(err error) []*FieldError {
	var es Errors
	if errors.As(err, &es) {
		return es
	}
	var fe *FieldError
	if errors.As(err, &fe) {
		return []*FieldError{fe}
	}
	return nil
}

// Finite checks that v is neither NaN nor infinite.
func (es *Errors) Finite(field string, v float64) bool {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		es.Add(field, "%v is not a finite number", v)
		return false
	}
	return true
}

// Range checks lo <= v <= hi (and finiteness), naming unit in the message.
func (es *Errors) Range(field string, v, lo, hi float64, unit string) bool {
	if !es.Finite(field, v) {
		return false
	}
	if v < lo || v > hi {
		es.Add(field, "%s%s is outside the allowed range [%s, %s]%s", fmtNum(v), unit, fmtNum(lo), fmtNum(hi), unit)
		return false
	}
	return true
}

func fmtNum(v float64) string { return fmt.Sprintf("%g", v) }

package scpi

import (
	"context"
	"errors"
	"fmt"

	"goniod/driver"
	"goniod/sim"
)

// Error codes. Negative codes are the standard SCPI error numbers; positive ones are this instrument's own.
const (
	codeNone             = 0
	codeInvalidCharacter = -101
	codeSyntax           = -102
	codeDataType         = -104
	codeParamNotAllowed  = -108
	codeMissingParam     = -109
	codeUndefinedHeader  = -113
	codeExecution        = -200
	codeOutOfRange       = -222
	codeIllegalValue     = -224
	codeQueueOverflow    = -350
	codeInputOverrun     = -363
	codeInterlockOpen    = 201
	codeCutShort         = 202
)

// titles are the standard texts that start each error message.
var titles = map[int]string{
	codeNone:             "No error",
	codeInvalidCharacter: "Invalid character",
	codeSyntax:           "Syntax error",
	codeDataType:         "Data type error",
	codeParamNotAllowed:  "Parameter not allowed",
	codeMissingParam:     "Missing parameter",
	codeUndefinedHeader:  "Undefined header",
	codeExecution:        "Execution error",
	codeOutOfRange:       "Data out of range",
	codeIllegalValue:     "Illegal parameter value",
	codeQueueOverflow:    "Queue overflow",
	codeInputOverrun:     "Input buffer overrun",
	codeInterlockOpen:    "Interlock open",
	codeCutShort:         "Command cut short",
}

// Error is a protocol error: an SCPI error code and what went wrong.
type Error struct {
	Code   int
	Detail string
}

func (e *Error) Error() string {
	if e.Detail == "" {
		return titles[e.Code]
	}
	return titles[e.Code] + "; " + e.Detail
}

func errorf(code int, format string, args ...any) *Error {
	return &Error{Code: code, Detail: fmt.Sprintf(format, args...)}
}

// asError maps an error of the instrument to a protocol error.
func asError(err error) *Error {
	var pe *Error
	switch {
	case errors.As(err, &pe):
		return pe
	case errors.Is(err, driver.ErrOutOfRange):
		return &Error{Code: codeOutOfRange, Detail: err.Error()}
	case errors.Is(err, driver.ErrUnknownAxis):
		return &Error{Code: codeIllegalValue, Detail: err.Error()}
	case errors.Is(err, driver.ErrInterlockOpen):
		return &Error{Code: codeInterlockOpen, Detail: "high voltage refused: the enclosure is open"}
	case errors.Is(err, sim.ErrHalted):
		return &Error{Code: codeCutShort, Detail: "halted"}
	case errors.Is(err, context.Canceled):
		return &Error{Code: codeCutShort, Detail: "aborted"}
	}
	return &Error{Code: codeExecution, Detail: err.Error()}
}

// errorQueue is the instrument's error queue: oldest first, at most errorQueueLen entries; when it overflows
// the newest entry becomes "Queue overflow".
type errorQueue struct {
	q []*Error
}

const errorQueueLen = 16

func (eq *errorQueue) push(e *Error) {
	switch {
	case len(eq.q) < errorQueueLen-1:
		eq.q = append(eq.q, e)
	case len(eq.q) == errorQueueLen-1:
		eq.q = append(eq.q, &Error{Code: codeQueueOverflow})
	}
}

func (eq *errorQueue) pop() *Error {
	if len(eq.q) == 0 {
		return &Error{Code: codeNone}
	}
	e := eq.q[0]
	eq.q = eq.q[1:]
	return e
}

func (eq *errorQueue) clear() { eq.q = nil }

// errorReply is the reply line to a command that failed.
func errorReply(e *Error) string { return fmt.Sprintf("ERR %d,%s", e.Code, quote(e.Error())) }

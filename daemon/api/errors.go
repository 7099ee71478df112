// Package api is goniod's gRPC surface: it maps the v1 protocol messages to the daemon's domain, calls the
// engine, controller and analysis, and maps domain errors to gRPC status codes once, here.
package api

import (
	"context"
	"errors"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"goniod/daemon/scan"
	"goniod/daemon/validate"
	"goniod/driver"
)

// toStatus maps a domain error to a gRPC status error. Validation errors carry a BadRequest detail with one
// violation per field.
func toStatus(err error) error {
	if err == nil {
		return nil
	}
	if _, ok := status.FromError(err); ok {
		return err
	}
	if fields := validate.Fields(err); len(fields) > 0 {
		st := status.New(codes.InvalidArgument, err.Error())
		br := &errdetails.BadRequest{}
		for _, f := range fields {
			br.FieldViolations = append(br.FieldViolations, &errdetails.BadRequest_FieldViolation{Field: f.Field, Description: f.Reason})
		}
		if withDetails, derr := st.WithDetails(br); derr == nil {
			st = withDetails
		}
		return st.Err()
	}
	code := codes.Internal
	switch {
	case errors.Is(err, scan.ErrNotFound):
		code = codes.NotFound
	case errors.Is(err, scan.ErrQueueFull):
		code = codes.ResourceExhausted
	case errors.Is(err, scan.ErrState), errors.Is(err, scan.ErrBusy), errors.Is(err, driver.ErrInterlockOpen),
		errors.Is(err, driver.ErrHighVoltageOff):
		code = codes.FailedPrecondition
	case errors.Is(err, driver.ErrLinkDown):
		code = codes.Unavailable
	case errors.Is(err, driver.ErrOutOfRange), errors.Is(err, driver.ErrUnknownAxis):
		code = codes.InvalidArgument
	case errors.Is(err, context.Canceled):
		code = codes.Canceled
	case errors.Is(err, context.DeadlineExceeded):
		code = codes.DeadlineExceeded
	}
	return status.Error(code, err.Error())
}

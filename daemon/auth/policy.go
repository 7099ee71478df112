package auth

import (
	"strings"

	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	goniodv1 "goniod/proto/goniod/v1"
)

// methodRoles is the role each RPC needs. Every method of goniod's services is listed, so that adding an RPC
// is a conscious decision about who may call it; a method missing here is refused to everyone.
var methodRoles = map[string]Role{
	goniodv1.Instrument_GetState_FullMethodName:   Viewer,
	goniodv1.Instrument_WatchState_FullMethodName: Viewer,
	goniodv1.Instrument_GetConfig_FullMethodName:  Viewer,
	goniodv1.Instrument_Move_FullMethodName:       Operator,
	goniodv1.Instrument_SetSource_FullMethodName:  Operator,
	goniodv1.Instrument_Count_FullMethodName:      Operator,
	goniodv1.Instrument_Align_FullMethodName:      Operator, // Admin to store the offsets (see Required)

	goniodv1.Scans_SubmitScan_FullMethodName:   Operator,
	goniodv1.Scans_SubmitSeries_FullMethodName: Operator,
	goniodv1.Scans_GetScan_FullMethodName:      Viewer,
	goniodv1.Scans_GetSeries_FullMethodName:    Viewer,
	goniodv1.Scans_ListScans_FullMethodName:    Viewer,
	goniodv1.Scans_WatchScan_FullMethodName:    Viewer,
	goniodv1.Scans_ReadPoints_FullMethodName:   Viewer,
	goniodv1.Scans_PauseScan_FullMethodName:    Operator,
	goniodv1.Scans_ResumeScan_FullMethodName:   Operator,
	goniodv1.Scans_CancelScan_FullMethodName:   Operator,
	goniodv1.Scans_ReleaseScan_FullMethodName:  Operator,

	// Analysis reads stored scans; saving a result writes to the store and needs Operator (see Required).
	goniodv1.Analysis_Convert_FullMethodName:        Viewer,
	goniodv1.Analysis_FindPeaks_FullMethodName:      Viewer,
	goniodv1.Analysis_IdentifyLines_FullMethodName:  Viewer,
	goniodv1.Analysis_FitLattice_FullMethodName:     Viewer,
	goniodv1.Analysis_MeasureWidth_FullMethodName:   Viewer,
	goniodv1.Analysis_FitLimit_FullMethodName:       Viewer,
	goniodv1.Analysis_GetSavedResult_FullMethodName: Viewer,
}

// serviceRoles covers the standard services by service name: the health check is open to probes without a
// token; reflection describes the API and needs a viewer.
var serviceRoles = map[string]Role{
	healthpb.Health_ServiceDesc.ServiceName:    Public,
	"grpc.reflection.v1.ServerReflection":      Viewer,
	"grpc.reflection.v1alpha.ServerReflection": Viewer,
}

// saver is a request that may ask to store its result (analysis).
type saver interface{ GetSave() bool }

// storer is a request that may ask to change the stored instrument configuration (alignment).
type storer interface{ GetStore() bool }

// Required returns the role a call of fullMethod ("/package.Service/Method") with request req needs; ok is
// false for a method no policy covers. req may be nil (streams are authorised before their request arrives).
func Required(fullMethod string, req any) (role Role, ok bool) {
	role, ok = methodRoles[fullMethod]
	if !ok {
		svc, _, found := strings.Cut(strings.TrimPrefix(fullMethod, "/"), "/")
		if !found {
			return 0, false
		}
		role, ok = serviceRoles[svc]
		return role, ok
	}
	if s, isSaver := req.(saver); isSaver && s.GetSave() && role < Operator {
		role = Operator
	}
	if s, isStorer := req.(storer); isStorer && s.GetStore() {
		role = Admin
	}
	return role, true
}

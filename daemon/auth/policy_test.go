package auth

import (
	"fmt"
	"testing"

	"google.golang.org/protobuf/reflect/protoreflect"
	"google.golang.org/protobuf/reflect/protoregistry"

	goniodv1 "goniod/proto/goniod/v1"
)

// goniodMethods lists every RPC of the goniod.v1 package from the registered descriptors, so a new RPC
// without a policy fails this test.
func goniodMethods(t *testing.T) []string {
	t.Helper()
	var out []string
	protoregistry.GlobalFiles.RangeFilesByPackage("goniod.v1", func(fd protoreflect.FileDescriptor) bool {
		for i := range fd.Services().Len() {
			s := fd.Services().Get(i)
			for j := range s.Methods().Len() {
				out = append(out, fmt.Sprintf("/%s/%s", s.FullName(), s.Methods().Get(j).Name()))
			}
		}
		return true
	})
	if len(out) < 20 {
		t.Fatalf("found only %d goniod.v1 methods in the registry", len(out))
	}
	return out
}

func TestEveryMethodHasAPolicy(t *testing.T) {
	for _, m := range goniodMethods(t) {
		if _, ok := Required(m, nil); !ok {
			t.Errorf("%s has no access policy", m)
		}
	}
}

func TestRequired(t *testing.T) {
	cases := []struct {
		method string
		req    any
		want   Role
		ok     bool
	}{
		{goniodv1.Instrument_GetState_FullMethodName, nil, Viewer, true},
		{goniodv1.Scans_WatchScan_FullMethodName, nil, Viewer, true},
		{goniodv1.Scans_SubmitScan_FullMethodName, &goniodv1.SubmitScanRequest{}, Operator, true},
		{goniodv1.Instrument_SetSource_FullMethodName, &goniodv1.SetSourceRequest{}, Operator, true},
		{goniodv1.Instrument_Align_FullMethodName, &goniodv1.AlignRequest{}, Operator, true},
		{goniodv1.Instrument_Align_FullMethodName, &goniodv1.AlignRequest{Store: true}, Admin, true},
		{goniodv1.Analysis_FindPeaks_FullMethodName, &goniodv1.FindPeaksRequest{}, Viewer, true},
		{goniodv1.Analysis_FindPeaks_FullMethodName, &goniodv1.FindPeaksRequest{Save: true}, Operator, true},
		{goniodv1.Analysis_FitLattice_FullMethodName, &goniodv1.FitLatticeRequest{Save: true}, Operator, true},
		{"/grpc.health.v1.Health/Check", nil, Public, true},
		{"/grpc.health.v1.Health/Watch", nil, Public, true},
		{"/grpc.reflection.v1.ServerReflection/ServerReflectionInfo", nil, Viewer, true},
		{"/goniod.v1.Scans/DeleteEverything", nil, 0, false},
		{"/other.Service/Method", nil, 0, false},
		{"nonsense", nil, 0, false},
	}
	for _, c := range cases {
		got, ok := Required(c.method, c.req)
		if got != c.want || ok != c.ok {
			t.Errorf("Required(%s, %T) = %v, %v; want %v, %v", c.method, c.req, got, ok, c.want, c.ok)
		}
	}
}

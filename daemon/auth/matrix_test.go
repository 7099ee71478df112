package auth_test

import (
	"context"
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"
	"google.golang.org/protobuf/reflect/protoregistry"
	"google.golang.org/protobuf/types/known/durationpb"

	"goniod/client"
	"goniod/daemon/auth"
	"goniod/daemon/config"
	"goniod/daemon/server/servertest"
	goniodv1 "goniod/proto/goniod/v1"
)

var roleTokens = map[auth.Role]string{
	auth.Viewer:   "matrix-viewer-0123456789",
	auth.Operator: "matrix-operator-0123456789",
	auth.Admin:    "matrix-admin-0123456789",
}

func writeTokens(t *testing.T) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "tokens")
	text := "# test tokens\nviewer vera " + roleTokens[auth.Viewer] + "\noperator otto " + roleTokens[auth.Operator] +
		"\nadmin ada " + roleTokens[auth.Admin] + "\n"
	if err := os.WriteFile(path, []byte(text), 0o600); err != nil {
		t.Fatal(err)
	}
	return path
}

// rpc is one method of the API with a request to send.
type rpc struct {
	name string // full method name
	desc protoreflect.MethodDescriptor
	req  proto.Message
}

// apiMethods lists every goniod.v1 RPC, the health check and reflection, each with a request: a real one for the
// control calls (so that a call let through would change something), an empty one elsewhere.
func apiMethods(t *testing.T, scanID string) []rpc {
	t.Helper()
	real := map[string]proto.Message{
		goniodv1.Scans_SubmitScan_FullMethodName: &goniodv1.SubmitScanRequest{Scan: &goniodv1.ScanRequest{
			Kind:     &goniodv1.ScanRequest_Timed{Timed: &goniodv1.TimedScan{Points: 2}},
			Counting: &goniodv1.Counting{Dwell: durationpb.New(time.Second)}, Label: "matrix"}},
		goniodv1.Scans_GetScan_FullMethodName:     &goniodv1.GetScanRequest{Id: scanID},
		goniodv1.Scans_WatchScan_FullMethodName:   &goniodv1.WatchScanRequest{Id: scanID},
		goniodv1.Scans_ReadPoints_FullMethodName:  &goniodv1.ReadPointsRequest{Id: scanID},
		goniodv1.Scans_PauseScan_FullMethodName:   &goniodv1.ScanRef{Id: scanID},
		goniodv1.Scans_ResumeScan_FullMethodName:  &goniodv1.ScanRef{Id: scanID},
		goniodv1.Scans_CancelScan_FullMethodName:  &goniodv1.ScanRef{Id: scanID},
		goniodv1.Scans_ReleaseScan_FullMethodName: &goniodv1.ScanRef{Id: scanID},
		goniodv1.Instrument_Move_FullMethodName:   &goniodv1.MoveRequest{Axis: "theta", AngleDeg: 12.5},
		goniodv1.Instrument_SetSource_FullMethodName: &goniodv1.SetSourceRequest{Kv: proto.Float64(25),
			Ma: proto.Float64(0.6)},
		goniodv1.Instrument_Count_FullMethodName:      &goniodv1.CountRequest{Dwell: durationpb.New(time.Second)},
		goniodv1.Instrument_Align_FullMethodName:      &goniodv1.AlignRequest{Store: true, Dwell: durationpb.New(time.Millisecond)},
		goniodv1.Instrument_WatchState_FullMethodName: &goniodv1.WatchStateRequest{Interval: durationpb.New(100 * time.Millisecond)},
		goniodv1.Analysis_FindPeaks_FullMethodName:    &goniodv1.FindPeaksRequest{Save: true},
	}
	var out []rpc
	add := func(s protoreflect.ServiceDescriptor) {
		for j := range s.Methods().Len() {
			m := s.Methods().Get(j)
			name := "/" + string(s.FullName()) + "/" + string(m.Name())
			req := real[name]
			if req == nil {
				mt, err := protoregistry.GlobalTypes.FindMessageByName(m.Input().FullName())
				if err != nil {
					t.Fatal(err)
				}
				req = mt.New().Interface()
			}
			out = append(out, rpc{name: name, desc: m, req: req})
		}
	}
	for _, file := range []string{"goniod/v1/scans.proto", "goniod/v1/instrument.proto", "goniod/v1/analysis.proto",
		"grpc/health/v1/health.proto", "grpc/reflection/v1/reflection.proto"} {
		fd, err := protoregistry.GlobalFiles.FindFileByPath(file)
		if err != nil {
			t.Fatal(err)
		}
		for i := range fd.Services().Len() {
			add(fd.Services().Get(i))
		}
	}
	if len(out) < 25 {
		t.Fatalf("only %d methods found", len(out))
	}
	return out
}

// invoke calls one RPC on conn. A stream counts as admitted when its first message (or its end) arrives.
func invoke(ctx context.Context, conn *grpc.ClientConn, m rpc) error {
	ctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	mt, err := protoregistry.GlobalTypes.FindMessageByName(m.desc.Output().FullName())
	if err != nil {
		return err
	}
	resp := mt.New().Interface()
	if !m.desc.IsStreamingServer() && !m.desc.IsStreamingClient() {
		return conn.Invoke(ctx, m.name, m.req, resp)
	}
	desc := &grpc.StreamDesc{ServerStreams: m.desc.IsStreamingServer(), ClientStreams: m.desc.IsStreamingClient()}
	cs, err := conn.NewStream(ctx, desc, m.name)
	if err != nil {
		return err
	}
	if err := cs.SendMsg(m.req); err != nil && !errors.Is(err, io.EOF) {
		return err
	}
	if err := cs.CloseSend(); err != nil {
		return err
	}
	if err := cs.RecvMsg(resp); err != nil && !errors.Is(err, io.EOF) {
		return err
	}
	return nil
}

// caller is one way of calling: a token (or none) over TLS or not.
type caller struct {
	name  string
	token string
	role  auth.Role // 0 for no or a wrong token
	tls   bool
}

func callers() []caller {
	var out []caller
	for _, tls := range []bool{true, false} {
		suffix := ""
		if !tls {
			suffix = " without TLS"
		}
		out = append(out,
			caller{"no token" + suffix, "", 0, tls},
			caller{"wrong token" + suffix, "matrix-nobody-0123456789", 0, tls},
			caller{"viewer" + suffix, roleTokens[auth.Viewer], auth.Viewer, tls},
			caller{"operator" + suffix, roleTokens[auth.Operator], auth.Operator, tls},
			caller{"admin" + suffix, roleTokens[auth.Admin], auth.Admin, tls})
	}
	return out
}

// TestAuthMatrix calls every RPC as every role, with no token, with a wrong token, and without TLS, on a
// daemon with TLS and a tokens file. A call below its role is refused before it does anything; without TLS
// nothing gets through; control calls leave no trace unless the role allows them.
func TestAuthMatrix(t *testing.T) {
	certs := servertest.NewCerts(t)
	d := servertest.Start(t, servertest.WithConfig(func(f *config.File) {
		f.Security = config.Security{TLSCert: certs.ServerCert, TLSKey: certs.ServerKey, Tokens: writeTokens(t)}
	}))
	ctx := context.Background()
	op := connect(t, d.Addr, certs.CA, roleTokens[auth.Operator])
	done, err := op.Submit(ctx, client.ScanRequest{Kind: client.Timed, Points: 3, Dwell: time.Second})
	if err != nil {
		t.Fatal(err)
	}
	waitDone(t, op, done.ID)
	methods := apiMethods(t, done.ID)
	scansBefore := countScans(t, op)
	for _, c := range callers() {
		var opts []client.Option
		if c.tls {
			opts = append(opts, client.WithTLS(certs.CA, "", ""))
		}
		if c.token != "" {
			opts = append(opts, client.WithToken(c.token))
		}
		cl, err := client.New(d.Addr, append(opts, client.WithRetries(0, 0))...)
		if err != nil {
			t.Fatal(err)
		}
		for _, m := range methods {
			need, _ := auth.Required(m.name, m.req)
			err := invoke(ctx, cl.Conn(), m)
			code := status.Code(err)
			switch {
			case !c.tls:
				if code != codes.Unavailable {
					t.Errorf("%s, %s: %v; want Unavailable (no TLS, no call)", c.name, m.name, err)
				}
			case need == auth.Public && c.token == "":
				if err != nil {
					t.Errorf("%s, %s: %v; the health check needs no token", c.name, m.name, err)
				}
			case c.role == 0:
				if code != codes.Unauthenticated {
					t.Errorf("%s, %s: %v; want Unauthenticated", c.name, m.name, err)
				}
			case c.role < need:
				if code != codes.PermissionDenied {
					t.Errorf("%s, %s: %v; want PermissionDenied (needs %s)", c.name, m.name, err, need)
				}
			default:
				if code == codes.Unauthenticated || code == codes.PermissionDenied || code == codes.Unavailable {
					t.Errorf("%s, %s: %v; the %s role should be let through", c.name, m.name, err, c.role)
				}
			}
		}
		cl.Close()
		if c.role >= auth.Operator && c.tls {
			scansBefore++ // its submit went through
		}
		assertNoControlTrace(t, op, scansBefore, c.name, c.role < auth.Operator || !c.tls)
	}
	logs := d.Logs()
	for _, tok := range roleTokens {
		if strings.Contains(logs, tok) {
			t.Fatal("a token appears in the daemon's log")
		}
	}
	for _, want := range []string{"who=otto role=operator via=token", "call=Scans/SubmitScan result=OK", "who=vera role=viewer", "result=PermissionDenied",
		"audit: unauthenticated call refused"} {
		if !strings.Contains(logs, want) {
			t.Errorf("daemon log lacks %q", want)
		}
	}
}

// assertNoControlTrace checks the number of scans after a caller's turn and, for a refused caller, that its
// move and source calls changed nothing. After an allowed caller, theta and the tube are put back.
func assertNoControlTrace(t *testing.T, c *client.Client, wantScans int, who string, refused bool) {
	t.Helper()
	if n := countScans(t, c); n != wantScans {
		t.Fatalf("after %s: %d scans, want %d", who, n, wantScans)
	}
	ctx := context.Background()
	if !refused {
		waitIdle(t, c)
		if _, err := c.Move(ctx, "theta", 10); err != nil {
			t.Fatal(err)
		}
		kv, ma := 20.0, 0.5
		if _, err := c.SetSource(ctx, client.SourceChange{KV: &kv, MA: &ma}); err != nil {
			t.Fatal(err)
		}
		return
	}
	st, err := c.State(ctx)
	if err != nil {
		t.Fatal(err)
	}
	for _, a := range st.Axes {
		if a.Name == "theta" && a.Position == 12.5 {
			t.Fatalf("%s: theta moved to 12.5° by a refused call", who)
		}
	}
	if st.KV == 25 {
		t.Fatalf("%s: the tube was set to 25 kV by a refused call", who)
	}
}

func connect(t *testing.T, addr, ca, token string) *client.Client {
	t.Helper()
	c, err := client.New(addr, client.WithTLS(ca, "", ""), client.WithToken(token))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

func countScans(t *testing.T, c *client.Client) int {
	t.Helper()
	scans, _, err := c.List(context.Background(), client.ListOptions{PageSize: 1000})
	if err != nil {
		t.Fatal(err)
	}
	return len(scans)
}

func waitDone(t *testing.T, c *client.Client, id string) {
	t.Helper()
	deadline := time.Now().Add(20 * time.Second)
	for {
		s, err := c.Scan(context.Background(), id)
		if err != nil {
			t.Fatal(err)
		}
		if s.State == client.Done {
			return
		}
		if time.Now().After(deadline) {
			t.Fatalf("scan %s is %s", id, s.State)
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// waitIdle waits until no scan runs or waits.
func waitIdle(t *testing.T, c *client.Client) {
	t.Helper()
	deadline := time.Now().Add(20 * time.Second)
	for {
		st, err := c.State(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		if st.ScanID == "" && st.QueueLength == 0 {
			return
		}
		if time.Now().After(deadline) {
			t.Fatalf("scan %s still %s", st.ScanID, st.ScanState)
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// TestClientCertificates: with a client CA and no tokens file, only clients with a certificate from that CA get
// in, and the audit names them by the certificate's common name.
func TestClientCertificates(t *testing.T) {
	certs := servertest.NewCerts(t)
	d := servertest.Start(t, servertest.WithConfig(func(f *config.File) {
		f.Security = config.Security{TLSCert: certs.ServerCert, TLSKey: certs.ServerKey, TLSClientCA: certs.CA}
	}))
	ctx := context.Background()
	for _, c := range []struct {
		name      string
		cert, key string
		ok        bool
	}{
		{"no client certificate", "", "", false},
		{"certificate from another CA", certs.StrangerCert, certs.StrangerKey, false},
		{"certificate from the configured CA", certs.ClientCert, certs.ClientKey, true},
	} {
		cl, err := client.New(d.Addr, client.WithTLS(certs.CA, c.cert, c.key), client.WithRetries(0, 0))
		if err != nil {
			t.Fatal(err)
		}
		_, err = cl.Submit(ctx, client.ScanRequest{Kind: client.Timed, Points: 1, Dwell: time.Second})
		cl.Close()
		if c.ok != (err == nil) {
			t.Errorf("%s: submit gave %v", c.name, err)
		}
	}
	if !strings.Contains(d.Logs(), "who=client role=admin via=certificate") {
		t.Error("the audit line does not name the certificate's holder")
	}
}

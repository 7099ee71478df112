#!/usr/bin/python3
"""Run a tube-voltage series on goniod from Python and write each scan's points as CSV.

The demo lab checks the short-wavelength limit of its copper-anode unit: one coupled θ–2θ scan of the LiF analyzer
crystal per tube voltage. This script generates the gRPC stubs from the repository's proto/ when it starts,
submits the series, follows each scan until it ends and writes its points with the same columns as
`gonio fetch ID --format csv`.

Needs Debian's python3-grpcio, python3-protobuf, python3-grpc-tools and protobuf-compiler (with libprotobuf-dev
for the well-known types). Run it with /usr/bin/python3, which sees Debian's packages:

    /usr/bin/python3 examples/python/voltage_series.py --addr 127.0.0.1:7461 --kv 12,20,30 --out series-csv
"""

import argparse
import csv
import glob
import os
import re
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
PROTO_DIR = os.path.normpath(os.path.join(HERE, "..", "..", "proto"))
WELL_KNOWN = "/usr/include"  # google/protobuf/*.proto from libprotobuf-dev


def generate_stubs(out_dir):
    """Write goniod/v1/*_pb2.py and *_pb2_grpc.py into out_dir.

    The message classes come from Debian's protoc (3.21), which knows proto3 `optional`. The service stubs come
    from grpc_tools, whose bundled protoc (3.5) predates `optional`: it reads a copy of the files with those
    labels removed. A service stub refers to its messages by name only, so the result is the same.
    """
    protos = sorted(glob.glob(os.path.join(PROTO_DIR, "goniod", "v1", "*.proto")))
    if not protos:
        sys.exit("no .proto files under %s" % PROTO_DIR)
    subprocess.run(["protoc", "-I" + PROTO_DIR, "-I" + WELL_KNOWN, "--python_out=" + out_dir] + protos, check=True)

    plain = os.path.join(out_dir, "_plain")
    copies = []
    for path in protos:
        rel = os.path.relpath(path, PROTO_DIR)
        dst = os.path.join(plain, rel)
        os.makedirs(os.path.dirname(dst), exist_ok=True)
        with open(path) as f:
            text = re.sub(r"(?m)^(\s*)optional\s+", r"\1", f.read())
        with open(dst, "w") as f:
            f.write(text)
        copies.append(dst)
    from grpc_tools import protoc

    args = ["grpc_tools.protoc", "-I" + plain, "-I" + WELL_KNOWN, "--grpc_python_out=" + out_dir] + copies
    if protoc.main(args) != 0:
        sys.exit("grpc_tools.protoc failed")
    sys.path.insert(0, out_dir)


def columns(axes):
    """The CSV columns of gonio fetch (proto/goniod/v1/pointtable.go)."""
    return (["index", "time"] + [a + "_deg" for a in axes] + [a + "_set_deg" for a in axes]
            + ["dwell_s", "counts", "rate_cps", "rate_err_cps", "corrected_rate_cps", "corrected_rate_err_cps",
               "tube_kv", "tube_ma", "wavelength_nm", "energy_kev"])


def row(p, axes):
    actual = {a.name: a.actual_deg for a in p.axes}
    requested = {a.name: a.set_deg for a in p.axes}
    optional = lambda name: repr(getattr(p, name)) if p.HasField(name) else ""
    return ([p.index, p.time.ToJsonString()] + [repr(actual[a]) for a in axes] + [repr(requested[a]) for a in axes]
            + [repr(p.dwell_s), p.counts, repr(p.rate_cps), repr(p.rate_err_cps), repr(p.corrected_rate_cps),
               repr(p.corrected_rate_err_cps), repr(p.tube_kv), repr(p.tube_ma), optional("wavelength_nm"),
               optional("energy_kev")])


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--addr", default=os.environ.get("GONIO_ADDR", "127.0.0.1:7461"), help="goniod host:port")
    ap.add_argument("--token", default=os.environ.get("GONIO_TOKEN", ""), help="bearer token (env GONIO_TOKEN)")
    ap.add_argument("--kv", default="12,15,20,25,30", help="tube voltages, kV, comma-separated")
    ap.add_argument("--ma", type=float, default=0.8, help="tube current, mA")
    ap.add_argument("--from", dest="start", type=float, default=4.0, help="first crystal angle θ, degrees")
    ap.add_argument("--to", type=float, default=30.0, help="last crystal angle θ, degrees")
    ap.add_argument("--step", type=float, default=0.1, help="step of θ, degrees")
    ap.add_argument("--dwell", type=float, default=1.0, help="counting time per point, seconds")
    ap.add_argument("--label", default="LiF batch 7", help="label stored with each scan")
    ap.add_argument("--out", default=".", help="directory for the CSV files")
    args = ap.parse_args()
    voltages = [float(v) for v in args.kv.split(",") if v.strip()]

    with tempfile.TemporaryDirectory(prefix="goniod-stubs-") as stubs:
        generate_stubs(stubs)
        import grpc
        from google.protobuf import duration_pb2
        from goniod.v1 import scans_pb2, scans_pb2_grpc, types_pb2

        channel = grpc.insecure_channel(args.addr)
        metadata = [("authorization", "Bearer " + args.token)] if args.token else None
        scans = scans_pb2_grpc.ScansStub(channel)

        dwell = duration_pb2.Duration()
        dwell.FromNanoseconds(int(args.dwell * 1e9))
        scan = types_pb2.ScanRequest(
            coupled=types_pb2.CoupledScan(from_deg=args.start, to_deg=args.to, step_deg=args.step),
            counting=types_pb2.Counting(dwell=dwell), label=args.label)
        series = types_pb2.SeriesRequest(scan=scan, sources=[types_pb2.Source(kv=kv, ma=args.ma) for kv in voltages])
        try:
            made = scans.SubmitSeries(scans_pb2.SubmitSeriesRequest(series=series), metadata=metadata)
        except grpc.RpcError as e:
            sys.exit("series refused: %s: %s" % (e.code().name, e.details()))
        print("series %s: %s" % (made.id, " ".join(made.scan_ids)))

        os.makedirs(args.out, exist_ok=True)
        failed = 0
        for scan_id in made.scan_ids:
            final = None
            for ev in scans.WatchScan(scans_pb2.WatchScanRequest(id=scan_id), metadata=metadata):
                if ev.WhichOneof("event") == "state":
                    final = ev.state
                if ev.end:
                    break
            if final is None or final.state != types_pb2.SCAN_STATE_DONE:
                print("%s ended %s: %s" % (scan_id, types_pb2.ScanState.Name(final.state) if final else "?",
                                           final.reason if final else ""))
                failed += 1
                continue
            axes = list(final.info.axes)
            path = os.path.join(args.out, scan_id + ".csv")
            n, peak = 0, 0.0
            with open(path, "w", newline="") as f:
                w = csv.writer(f, lineterminator="\n")
                w.writerow(columns(axes))
                for p in scans.ReadPoints(scans_pb2.ReadPointsRequest(id=scan_id), metadata=metadata):
                    w.writerow(row(p, axes))
                    n, peak = n + 1, max(peak, p.rate_cps)
            print("%s  %5.1f kV  %d points  highest rate %.0f counts/s  -> %s"
                  % (scan_id, final.request.source.kv, n, peak, path))
        return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())

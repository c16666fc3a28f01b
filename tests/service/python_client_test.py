#!/usr/bin/python3
"""An independent client for sightfix-server, written only from the README's "Wire" section with
Debian's python3-protobuf and the socket module: proves the wire is what the README says.

Usage: python_client_test.py BUILD_DIR SOURCE_DIR DATA_DIR  (DATA_DIR from make_map.sh)
"""
import csv
import json
import math
import os
import re
import signal
import socket
import struct
import subprocess
import sys
import tempfile
import threading
import time

build, source, data = sys.argv[1:4]
tmp = tempfile.mkdtemp()
subprocess.run(["protoc", f"--python_out={tmp}", f"-I{source}/proto",
                f"{source}/proto/sightfix.proto"], check=True)
sys.path.insert(0, tmp)
import sightfix_pb2 as pb  # noqa: E402

failures = 0
passes = 0


def check(name, ok, detail=""):
    global failures, passes
    print(("ok   " if ok else "FAIL ") + name + ("" if ok else f" ({detail})"))
    if ok:
        passes += 1
    else:
        failures += 1


def frame(envelope):
    payload = envelope.SerializeToString()
    return struct.pack(">I", len(payload)) + payload  # 4-byte big-endian length, then the bytes


def read_exact(sock, n):
    out = b""
    while len(out) < n:
        chunk = sock.recv(n - len(out))
        if not chunk:
            raise ConnectionError("closed")
        out += chunk
    return out


def read_answer(sock):
    (n,) = struct.unpack(">I", read_exact(sock, 4))
    env = pb.Envelope()
    env.ParseFromString(read_exact(sock, n))
    return env


# The README's worked example, byte for byte.
example = pb.Envelope(call_id=1, method="Describe")
check("README worked example bytes",
      frame(example).hex(" ") == "00 00 00 0c 08 01 12 08 44 65 73 63 72 69 62 65",
      frame(example).hex(" "))

def start_server(*extra):
    """sightfix-server on a free loopback port: (process, port or None, its log lines so far)."""
    proc = subprocess.Popen([f"{build}/server/sightfix-server", "--map", f"{data}/map",
                             "--listen", "127.0.0.1:0", "--http", "", "--workers", "1", *extra],
                            stderr=subprocess.PIPE, text=True)
    serving = None
    for line in proc.stderr:
        if '"serving"' in line:
            serving = json.loads(line)["port"]
            break
    # Keep reading the server's log (so a full pipe never blocks it) and keep its lines.
    lines = []
    threading.Thread(target=lambda: [lines.append(line) for line in proc.stderr],
                     daemon=True).start()
    return proc, serving, lines


server, port, log = start_server()
check("server started", port is not None)

sock = socket.create_connection(("127.0.0.1", port))
sock.sendall(frame(pb.Envelope(call_id=7, method="Describe")))
answer = read_answer(sock)
describe = pb.DescribeResponse()
describe.ParseFromString(answer.body)
check("Describe answered", answer.call_id == 7 and answer.status.code == pb.Status.OK
      and describe.images > 0, str(answer))

# Locate: the image's bytes and its calibration, read from the OpenCV YAML by hand.
drive = f"{data}/town/query-day"
yml = open(f"{drive}/camera.yml").read()
k = [float(x) for x in re.search(r"camera_matrix:.*?data: \[(.*?)\]", yml, re.S).group(1).split(",")]
dist = [float(x) for x in re.search(r"distortion_coefficients:.*?data: \[(.*?)\]", yml, re.S).group(1).split(",")]
width = int(re.search(r"image_width: (\d+)", yml).group(1))
height = int(re.search(r"image_height: (\d+)", yml).group(1))
rows = list(csv.DictReader(open(f"{drive}/drive.csv")))
calls = {}
for call_id, row in ((11, rows[4]), (12, rows[12])):  # two calls in flight on one connection
    req = pb.LocateRequest(image=open(f"{drive}/{row['image']}", "rb").read(),
                           calibration=pb.Calibration(width=width, height=height, fx=k[0], fy=k[4],
                                                      cx=k[2], cy=k[5], distortion=dist))
    req.prior.lat_deg, req.prior.lon_deg, req.prior.radius_m = float(row["lat"]), float(row["lon"]), 150
    calls[call_id] = row
    sock.sendall(frame(pb.Envelope(call_id=call_id, method="Locate", deadline_ms=30000,
                                   body=req.SerializeToString())))
for _ in range(2):
    answer = read_answer(sock)
    row = calls.pop(answer.call_id, None)
    fix = pb.LocateResponse()
    fix.ParseFromString(answer.body)
    f = fix.fix
    # Small distances: an equirectangular approximation is exact to millimetres (common practice).
    north = (f.lat_deg - float(row["lat"])) * 111132.0
    east = (f.lon_deg - float(row["lon"])) * 111320.0 * math.cos(math.radians(f.lat_deg))
    err = math.hypot(north, east)
    check(f"Locate call {answer.call_id} refined within 1 m",
          answer.status.code == pb.Status.OK and f.quality == pb.Fix.REFINED and err < 1.0,
          f"status {answer.status.code}, quality {f.quality}, error {err:.3f} m")
check("every call answered once", not calls, str(calls.keys()))

sock.sendall(frame(pb.Envelope(call_id=21, method="Teleport")))
answer = read_answer(sock)
check("unknown method is UNIMPLEMENTED", answer.call_id == 21
      and answer.status.code == pb.Status.UNIMPLEMENTED, str(answer.status))

server.send_signal(signal.SIGHUP)  # reload the map while connected
for _ in range(100):
    if any('"reloaded"' in line for line in log):
        break
    time.sleep(0.1)
check("SIGHUP reloads the map", any('"reloaded"' in line for line in log))
sock.sendall(frame(pb.Envelope(call_id=31, method="Describe")))
answer = read_answer(sock)
check("same connection served after the reload", answer.call_id == 31
      and answer.status.code == pb.Status.OK, str(answer.status))
sock.close()

server.send_signal(signal.SIGTERM)
check("SIGTERM exits 0", server.wait(timeout=30) == 0)

# Over TLS, as the README's "Wire" section says: the standard ssl module, TLS 1.3, ALPN
# sightfix/1, the server's name checked, this client's certificate presented.
import ssl  # noqa: E402

pki = f"{tmp}/pki"
for step in (["ca"], ["server", "localhost", "DNS:localhost", "IP:127.0.0.1"],
             ["vehicle", "vehicle-py"]):
    subprocess.run(["bash", f"{source}/scripts/make-certs.sh", pki] + step, check=True,
                   stdout=subprocess.DEVNULL)
server, port, log = start_server("--tls-cert", f"{pki}/localhost.crt", "--tls-key",
                                 f"{pki}/localhost.key", "--tls-client-ca", f"{pki}/ca.crt")
check("TLS server started", port is not None)
context = ssl.SSLContext(ssl.PROTOCOL_TLS_CLIENT)  # verifies the certificate and the host name
context.minimum_version = ssl.TLSVersion.TLSv1_3
context.load_verify_locations(f"{pki}/ca.crt")
context.load_cert_chain(f"{pki}/vehicle-py.crt", f"{pki}/vehicle-py.key")
context.set_alpn_protocols(["sightfix/1"])
with socket.create_connection(("127.0.0.1", port)) as raw:
    with context.wrap_socket(raw, server_hostname="localhost") as tls:
        check("TLS 1.3 with ALPN sightfix/1", tls.version() == "TLSv1.3"
              and tls.selected_alpn_protocol() == "sightfix/1",
              f"{tls.version()} {tls.selected_alpn_protocol()}")
        tls.sendall(frame(pb.Envelope(call_id=41, method="Describe")))
        answer = read_answer(tls)
        check("Describe answered over TLS", answer.call_id == 41
              and answer.status.code == pb.Status.OK, str(answer.status))
anonymous = ssl.SSLContext(ssl.PROTOCOL_TLS_CLIENT)
anonymous.load_verify_locations(f"{pki}/ca.crt")
anonymous.set_alpn_protocols(["sightfix/1"])
try:
    with socket.create_connection(("127.0.0.1", port)) as raw:
        with anonymous.wrap_socket(raw, server_hostname="localhost") as tls:
            tls.sendall(frame(pb.Envelope(call_id=42, method="Describe")))
            read_answer(tls)
    check("no client certificate: refused", False, "answered")
except (ssl.SSLError, ConnectionError, OSError) as e:
    check("no client certificate: refused", "certificate required" in str(e) or
          isinstance(e, ConnectionError), str(e))
server.send_signal(signal.SIGTERM)
check("TLS server: SIGTERM exits 0", server.wait(timeout=30) == 0)
check("the log names the vehicle", any('"client":"vehicle-py"' in line for line in log))
print(f"{passes} passed, {failures} failed")
sys.exit(1 if failures else 0)

"""Reply latency of the simulator in frozen mode: 201- and 100,001-point REAL,64 trace queries.

Runs the simulator as a subprocess (`python -m simulators --frozen`) and times a raw-socket
client and a pyvisa-py client side by side.
"""
import socket, statistics, subprocess, sys, time
import numpy as np

def read_block(sock, buf=b""):
    while len(buf) < 2: buf += sock.recv(1 << 20)
    d = int(buf[1:2])
    while len(buf) < 2 + d: buf += sock.recv(1 << 20)
    n = int(buf[2:2 + d]); total = 2 + d + n + 1
    while len(buf) < total: buf += sock.recv(1 << 22)
    return buf[2 + d:2 + d + n]

proc = subprocess.Popen([sys.executable, "-m", "simulators", "--frozen", "--time-scale", "0",
                         "--no-noise"], stdout=subprocess.PIPE, text=True)
try:
    res = proc.stdout.readline().strip(); proc.stdout.readline()
    host, port = res.split("::")[1], int(res.split("::")[2])
    for points, reps in ((201, 2000), (100001, 60)):
        s = socket.create_connection((host, port)); s.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
        s.sendall(f":SWE:POIN {points};:FORM REAL,64;:FORM:BORD SWAP;:INIT;*OPC?\n".encode()); s.recv(10)
        s.sendall(b":TRAC? S11\n"); read_block(s)   # first: encode + cache
        t = []
        for _ in range(reps):
            t0 = time.perf_counter(); s.sendall(b":TRAC? S11\n"); read_block(s); t.append(time.perf_counter() - t0)
        s.sendall(b"*IDN?\n"); s.recv(100)
        tid = []
        for _ in range(2000 if points == 201 else 1):
            t0 = time.perf_counter(); s.sendall(b"*IDN?\n"); s.recv(100); tid.append(time.perf_counter() - t0)
        s.close()
        import pyvisa
        rm = pyvisa.ResourceManager("@py"); inst = rm.open_resource(res, read_termination="\n", write_termination="\n")
        tv = []
        for _ in range(min(reps, 300)):
            t0 = time.perf_counter(); inst.query_binary_values(":TRAC? S11", datatype="d", container=np.array); tv.append(time.perf_counter() - t0)
        inst.close(); rm.close()
        mb = points * 16 / 1e6
        print(f"{points:>6} points ({mb:.3f} MB): raw socket median {statistics.median(t)*1e3:.3f} ms, "
              f"pyvisa-py median {statistics.median(tv)*1e3:.3f} ms"
              + (f", *IDN? median {statistics.median(tid)*1e3:.3f} ms" if points == 201 else ""))
    # non-frozen comparison
finally:
    proc.terminate(); proc.wait()

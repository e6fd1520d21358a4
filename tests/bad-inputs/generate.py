#!/usr/bin/env python3
"""Writes the bad-input corpus of tests/bad_inputs.rs (run once; the files are committed).

Every waveform is an invented scenario made by formula: a low-side switch holding the node
at 0.2 V, released at t_edge so the node rings up about a 24 V supply as an underdamped RLC
(1 MHz, decaying over a few periods), sampled at 10 ns.
"""
import math
import os
import struct

HERE = os.path.dirname(os.path.abspath(__file__))
DT = 10e-9
V_ON, SUPPLY, V0 = 0.2, 24.0, 180.0
F_RING, ALPHA = 1e6, 4e5


def node(t, t_edge):
    if t < t_edge:
        return V_ON
    x = t - t_edge
    return SUPPLY + V0 * math.exp(-ALPHA * x) * math.sin(2 * math.pi * F_RING * x) \
        - (SUPPLY - V_ON) * math.exp(-ALPHA * x) * math.cos(2 * math.pi * F_RING * x)


def write(name, data):
    mode = "wb" if isinstance(data, bytes) else "w"
    with open(os.path.join(HERE, name), mode) as f:
        f.write(data)


def rows(n, value, t0=0.0):
    return "".join(f"{t0 + k * DT:.4e},{value(k):.4f}\n" for k in range(n))


GOOD = "t,v_sw\n" + rows(40, lambda k: V_ON)

write("empty.csv", "")
write("header-only.csv", "t [s],v_sw [V]\n")
lines = GOOD.splitlines(True)
lines[12] = "1.1000e-07,open\n"
write("text-cell.csv", "".join(lines))
lines = GOOD.splitlines(True)
lines[8] = "7.0000e-08,NaN\n"
lines[9] = "8.0000e-08,inf\n"
write("nan-cells.csv", "".join(lines))
lines = GOOD.splitlines(True)
lines[20] = "1.9000e-07,0.2000,0.3000\n"
write("ragged-row.csv", "".join(lines))
lines = GOOD.splitlines(True)
lines[30] = "1.0000e-07,0.2000\n"
write("time-backwards.csv", "".join(lines))
# SCPI's stand-in for an out-of-range sample, which some instruments export in its place.
lines = GOOD.splitlines(True)
lines[16] = "1.5000e-07,9.9E+37\n"
write("overrange-marker.csv", "".join(lines))
# A gap: rows 10 ns apart, then a jump of 1 us (a scope's segmented memory pasted together).
write("time-gap.csv", "t,v_sw\n" + rows(20, lambda k: V_ON) + rows(20, lambda k: V_ON, t0=1.2e-6))


def wav(n_frames, data_bytes, claimed=None, rate=100_000_000 // 1):
    fmt = struct.pack("<HHIIHH", 1, 1, rate, rate * 2, 2, 16)
    size = claimed if claimed is not None else len(data_bytes)
    riff_size = min(0xFFFFFFFF, 4 + 8 + len(fmt) + 8 + size)
    return (b"RIFF" + struct.pack("<I", riff_size) + b"WAVE" + b"fmt " + struct.pack("<I", len(fmt))
            + fmt + b"data" + struct.pack("<I", size) + data_bytes)


samples = struct.pack("<100h", *[int(1000 * math.sin(k / 5)) for k in range(100)])
# The header promises 200 bytes of samples; the file stops after 101 (half a sample at the end).
write("cut-short.wav", wav(100, samples[:101], claimed=200))
# The header claims 4 GB of samples; 200 bytes follow.
write("huge-claim.wav", wav(100, samples, claimed=0xFFFFFFF0))
write("sidecar-missing-field.wav", wav(100, samples))
write("sidecar-missing-field.json", '{"channels": [{"name": "v_sw", "unit": "V"}]}\n')
write("sidecar-wrong-field.wav", wav(100, samples))
write("sidecar-wrong-field.json",
      '{"channels": [{"name": "v_sw", "unit": "V", "volts_per_full_scale": "500 V"}]}\n')

# Bytes of a compressed or binary file given a .csv name (a fixed pseudo-random sequence).
state, blob = 12345, bytearray()
for _ in range(512):
    state = (1103515245 * state + 12345) % (1 << 31)
    blob.append(state >> 16 & 0xFF)
write("binary.csv", bytes(blob))

write("flat.csv", "t,v_sw\n" + rows(400, lambda k: 12.0))
# The switch turns on (24 V -> 0.2 V) and never turns off again.
write("no-turn-off.csv", "t,v_sw\n" + rows(600, lambda k: SUPPLY if k < 200 else V_ON))
# The record starts 0.3 us into a spike, then the switch is on for 3 us, then one full event.
N = 1600
T_EDGE = 3.5e-6
write("starts-mid-spike.csv", "t,v_sw\n" + rows(
    N, lambda k: node(k * DT + 0.3e-6, 0.0) if k * DT < 0.5e-6 else node(k * DT, T_EDGE)))
# A clean event with a current channel whose samples are all NaN after the edge (a probe
# that overranged and a scope that wrote NaN for it).
cur = []
for k in range(N):
    t = k * DT
    cur.append("NaN" if t >= T_EDGE else "0.5000")
write("nan-current.csv", "t,v_sw [V],i_sw [A]\n" + "".join(
    f"{k * DT:.4e},{node(k * DT, T_EDGE):.4f},{cur[k]}\n" for k in range(N)))

#!/usr/bin/env python3
"""Speed and memory of kickscan on the inputs the shared bench (../shared/bench/bench.py)
does not make: a 100 M-sample CSV, a 100 M-sample 16-bit WAV and a folder of 1000 short
captures.

Run from the project's root (after `cargo build --release`):

    python3 benches/streaming.py [--samples 100000000] [--files 1000] [--only csv,wav,folder]
                                 [--runs 3]

It uses the shared bench's Python environment and its capture maker (cached under
$KICKSCAN_BENCH_DIR or kickscan-bench in the temporary folder), writes the inputs there once,
and prints for each: wall time, user+sys CPU time, peak resident memory (ru_maxrss of the
child) for `cat` (the floor), kickscan, and for the folder the shared reference pipeline
looped over the files in one Python process. Each command runs --runs times, the commands
taking turns, and the medians are printed (peak memory: the largest). Machines here are
noisy: compare ratios from one run.

The WAV holds the capture maker's scenario (a 24 V coil, series RLC ring after turn-off,
body diode at -0.7 V, noise 0.4 V) as 16-bit codes over -50..500 V; the folder's captures
hold one event each (100 ns sampling, on for 2000 samples, then 0.8 ms of ring, sixteen
decay time constants), with their own noise seeds.
Invented demo data.
"""
import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
SHARED = os.path.join(HERE, "..", "..", "shared", "bench")


def run(cmd, stdout=subprocess.DEVNULL):
    t0 = time.perf_counter()
    p = subprocess.Popen(cmd, stdout=stdout, stderr=subprocess.PIPE)
    out = p.stdout.read() if stdout == subprocess.PIPE else b""
    err = p.stderr.read()
    _, status, ru = os.wait4(p.pid, 0)
    wall = time.perf_counter() - t0
    code = os.waitstatus_to_exitcode(status)
    if code != 0:
        sys.exit(f"{' '.join(cmd)} failed ({code}): {err.decode()[-2000:]}")
    return wall, ru.ru_utime + ru.ru_stime, ru.ru_maxrss / 1024.0, out


def runs_of(commands, runs):
    """Runs each (name, cmd, stdout) in turn, `runs` rounds; for each name the medians of
    wall and CPU time and the largest peak memory."""
    got = {name: [] for name, _, _ in commands}
    for _ in range(max(1, runs)):
        for name, cmd, stdout in commands:
            got[name].append(run(cmd, stdout))
    rows = {}
    for name, results in got.items():
        rows[name] = (
            statistics.median(r[0] for r in results),
            statistics.median(r[1] for r in results),
            max(r[2] for r in results),
        )
    return rows


def ring(np, n_on, n_total, dt, i0, rng):
    """On at 0.15 V for n_on samples, then the textbook series-RLC natural response."""
    vs, vsat, L, C, R = 24.0, 0.15, 50e-3, 1e-9, 2000.0
    alpha = R / (2 * L)
    wd = np.sqrt(1 / (L * C) - alpha * alpha)
    v = np.full(n_total, vsat)
    tau = np.arange(n_total - n_on) * dt
    A = vsat - vs
    B = (i0 / C + alpha * A) / wd
    v[n_on:] = vs + np.exp(-alpha * tau) * (A * np.cos(wd * tau) + B * np.sin(wd * tau))
    return np.maximum(v, -0.7)


def make_wav(py, path, samples):
    code = f"""
import numpy as np, json, struct, sys
sys.path.insert(0, {HERE!r})
from streaming import ring
n, dt, events = {samples}, 20e-9, 40
rng = np.random.default_rng(7)
period = n // events
with open({path!r} + '.tmp', 'wb') as f:
    f.write(b'RIFF' + struct.pack('<I', 36 + 2 * n) + b'WAVE')
    f.write(b'fmt ' + struct.pack('<IHHIIHH', 16, 1, 1, int(round(1 / dt)), int(round(2 / dt)), 2, 16))
    f.write(b'data' + struct.pack('<I', 2 * n))
    for k in range(events):
        m = min(period, n - k * period) if k < events - 1 else n - k * period
        v = ring(np, period // 5, m, dt, 0.04 * rng.uniform(0.8, 1.2), rng)
        v = v + rng.normal(0, 0.4, m)
        codes = np.clip(np.round((v - 225.0) / 275.0 * 32767), -32768, 32767).astype('<i2')
        f.write(codes.tobytes())
json.dump({{"sample_rate_hz": 1 / dt, "t0_s": 0.0, "channels": [{{"name": "v_sw", "unit": "V",
    "volts_per_full_scale": 275.0 * 32768 / 32767, "offset_v": 225.0}}]}}, open({path!r}[:-4] + '.json', 'w'))
"""
    subprocess.check_call([py, "-c", code])
    os.rename(path + ".tmp", path)


def make_folder(py, folder, files):
    code = f"""
import numpy as np, os, sys
sys.path.insert(0, {HERE!r})
from streaming import ring
dt = 100e-9
os.makedirs({folder!r} + '.tmp', exist_ok=True)
t = np.arange(10_000) * dt
for k in range({files}):
    rng = np.random.default_rng(1000 + k)
    v = ring(np, 2000, 10_000, dt, 0.04 * rng.uniform(0.8, 1.2), rng) + rng.normal(0, 0.4, 10_000)
    code = np.clip(np.round((v + 50.0) / 550.0 * 255), 0, 255)
    v = -50.0 + code * 550.0 / 255
    with open(os.path.join({folder!r} + '.tmp', f'shot-{{k:04d}}.csv'), 'w') as f:
        f.write('time_s,v_sw\\n')
        np.savetxt(f, np.column_stack((t, v)), fmt=('%.9e', '%.4f'), delimiter=',')
"""
    subprocess.check_call([py, "-c", code])
    os.rename(folder + ".tmp", folder)


def report(name, rows):
    print(f"\n{name}")
    floor = rows.get("floor")
    for k, (wall, cpu, rss) in rows.items():
        extra = f"  {wall / floor[0]:6.2f} x floor" if floor and k != "floor" else ""
        print(f"  {k:10s} wall {wall:8.3f} s  cpu {cpu:8.3f} s  peak RSS {rss:7.1f} MiB{extra}")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--samples", type=int, default=100_000_000)
    ap.add_argument("--files", type=int, default=1000)
    ap.add_argument("--only", default="csv,wav,folder")
    ap.add_argument("--binary", default="target/release/kickscan")
    ap.add_argument("--runs", type=int, default=3, help="rounds of runs; medians are printed")
    a = ap.parse_args()
    only = set(a.only.split(","))
    work = os.environ.get("KICKSCAN_BENCH_DIR", os.path.join(tempfile.gettempdir(), "kickscan-bench"))
    os.makedirs(work, exist_ok=True)
    py = os.path.join(work, "venv", "bin", "python")
    if not os.path.exists(py):
        sys.exit("run ../shared/bench/bench.py once first: it makes the Python environment")
    ks = a.binary

    if "csv" in only:
        csv = os.path.join(work, f"capture_{a.samples}.csv")
        if not os.path.exists(csv):
            subprocess.check_call([py, os.path.join(SHARED, "make_capture.py"), csv + ".tmp",
                                   "--samples", str(a.samples)])
            os.rename(csv + ".tmp", csv)
        rows = runs_of([("floor", ["sh", "-c", f"cat '{csv}' > /dev/null"], subprocess.DEVNULL),
                        ("kickscan", [ks, "measure", csv, "--json"], subprocess.PIPE)], a.runs)
        report(f"CSV {os.path.getsize(csv) / 1e6:.0f} MB, {a.samples} samples, medians of {a.runs} runs", rows)

    if "wav" in only:
        wav = os.path.join(work, f"capture_{a.samples}.wav")
        if not os.path.exists(wav):
            make_wav(py, wav, a.samples)
        rows = runs_of([("floor", ["sh", "-c", f"cat '{wav}' > /dev/null"], subprocess.DEVNULL),
                        ("kickscan", [ks, "measure", wav, "--json"], subprocess.PIPE)], a.runs)
        report(f"WAV {os.path.getsize(wav) / 1e6:.0f} MB, {a.samples} samples, 16-bit, medians of {a.runs} runs", rows)

    if "folder" in only:
        folder = os.path.join(work, f"folder_{a.files}")
        if not os.path.exists(folder):
            make_folder(py, folder, a.files)
        loop = (
            "import glob, io, sys, contextlib; sys.path.insert(0, %r); import reference\n"
            "for f in sorted(glob.glob(%r)):\n"
            "    sys.argv = ['reference.py', f]\n"
            "    with contextlib.redirect_stdout(io.StringIO()):\n"
            "        reference.main()\n" % (SHARED, os.path.join(folder, "*.csv"))
        )
        rows = runs_of([("floor", ["sh", "-c", f"cat '{folder}'/*.csv > /dev/null"], subprocess.DEVNULL),
                        ("reference", [py, "-c", loop], subprocess.DEVNULL),
                        ("kickscan", [ks, "measure", folder, "--json"], subprocess.PIPE)], a.runs)
        report(f"folder of {a.files} captures of 10 000 samples, medians of {a.runs} runs", rows)
        w, c, _ = rows["kickscan"]
        print(f"  kickscan wall / cpu {w / c:.2f} (both cores busy: at most 0.6)")
        print(f"  kickscan / reference wall {w / rows['reference'][0]:.3f}")


if __name__ == "__main__":
    main()

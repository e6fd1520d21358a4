#!/usr/bin/env bash
# Regenerates every file in sample-captures/ with `kickscan simulate`. The data are simulated,
# not measured: an invented valve-controller bench session (see README.md).
#
#   bash sample-captures/generate.sh                                 # release build via cargo
#   KICKSCAN=./target/debug/kickscan bash sample-captures/generate.sh
#
# Every run with the same kickscan version writes the same bytes (fixed seeds).
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
read -r -a ks <<<"${KICKSCAN:-cargo run --release --quiet --}"
sim() { "${ks[@]}" simulate --quiet "$@"; }

# The valve coil (24 V, 240 ohm, 200 mH; core losses as 100 kohm across it) on the board's
# drain node (470 pF: MOSFET output capacitance, coil winding, harness).
coil=(--supply 24V --inductance 200mH --resistance 240 --parallel-resistance 100k
      --capacitance 470pF)
# Drive: 4 ms on (4.8 L/R, the current settles), 8 ms off, slow gate drive (300 ns turn-off)
# with some spread from event to event; a little ripple on the 24 V rail and coil warm-up.
drive=(--on-time 4ms --off-time 8ms --turn-off 300ns --turn-off-spread 15
       --on-time-spread 2 --current-spread 1.5 --supply-ripple 0.15V)
# Scope: 12-bit, 100 V window from -5 V, 40 mV of probe and front-end noise.
scope=(--noise 40mV --adc-bits 12 --adc-min -5 --adc-max 95)
# Single shots at 1 MS/s; the long runs at 250 kS/s (still 15 samples per 61 us ring period).
shot=(--events 1 --dt 1us)
run=(--events 22 --dt 4us)

# The four suppression variants: the bare 60 V MOSFET (its avalanche clamps near 75 V),
# freewheel diode across the coil, diode plus 18 V zener, RC snubber across the switch.
variant_none=(--clamp avalanche --avalanche-v 75V --avalanche-r 0.5)
variant_diode=(--clamp diode)
variant_zener=(--clamp zener --zener-v 18V)
variant_snubber=(--clamp rc --snubber-r 150 --snubber-c 1uF)

rm -rf "$here/none" "$here/diode" "$here/zener" "$here/snubber" "$here/coil-current" \
       "$here/ringdown"
mkdir -p "$here/none" "$here/diode" "$here/zener" "$here/snubber" "$here/coil-current" \
         "$here/ringdown"

bench() { sim "${coil[@]}" "${drive[@]}" "${scope[@]}" "$@"; }

# none: three shots in three text exports, one long run as 16-bit WAV.
bench "${variant_none[@]}" "${shot[@]}" --seed 101 -o "$here/none/shot-01.csv"
bench "${variant_none[@]}" "${shot[@]}" --seed 102 -o "$here/none/shot-02.csv" \
      --format csv-semicolon --decimal-comma
bench "${variant_none[@]}" "${shot[@]}" --seed 103 -o "$here/none/shot-03.tsv" --time-unit us
bench "${variant_none[@]}" "${run[@]}" --seed 104 -o "$here/none/run-22.wav"

# diode: shots as CSV, tab-separated (time in us) and 24-bit WAV; long run as float WAV.
bench "${variant_diode[@]}" "${shot[@]}" --seed 201 -o "$here/diode/shot-01.csv"
bench "${variant_diode[@]}" "${shot[@]}" --seed 202 -o "$here/diode/shot-02.tsv" --time-unit us
bench "${variant_diode[@]}" "${shot[@]}" --seed 203 -o "$here/diode/shot-03.wav" --format wav24
bench "${variant_diode[@]}" "${run[@]}" --seed 204 -o "$here/diode/run-22.wav" --format wavf32

# zener: shots as semicolon/decimal-comma CSV, CSV with time in ms, 16-bit WAV; long run WAV.
bench "${variant_zener[@]}" "${shot[@]}" --seed 301 -o "$here/zener/shot-01.csv" \
      --format csv-semicolon --decimal-comma
bench "${variant_zener[@]}" "${shot[@]}" --seed 302 -o "$here/zener/shot-02.csv" --time-unit ms
bench "${variant_zener[@]}" "${shot[@]}" --seed 303 -o "$here/zener/shot-03.wav"
bench "${variant_zener[@]}" "${run[@]}" --seed 304 -o "$here/zener/run-22.wav"

# snubber: shots as CSV, tab-separated without the preamble, CSV with time in ms; long run as
# 16-bit WAV.
bench "${variant_snubber[@]}" "${shot[@]}" --seed 401 -o "$here/snubber/shot-01.csv"
bench "${variant_snubber[@]}" "${shot[@]}" --seed 402 -o "$here/snubber/shot-02.tsv" --no-preamble
bench "${variant_snubber[@]}" "${shot[@]}" --seed 403 -o "$here/snubber/shot-03.csv" --time-unit ms
bench "${variant_snubber[@]}" "${run[@]}" --seed 404 -o "$here/snubber/run-22.wav"

# coil-current: the zener build probed with a current probe on the coil lead as well
# (0.5 mA of probe noise), two shots.
bench "${variant_zener[@]}" "${shot[@]}" --with-current --current-noise 0.5mA \
      --seed 501 -o "$here/coil-current/zener-shot-01.csv"
bench "${variant_zener[@]}" "${shot[@]}" --with-current --current-noise 0.5mA \
      --seed 502 -o "$here/coil-current/zener-shot-02.csv"

# ringdown: the added-capacitance pair. The coil is charged from a 0.5 V bench supply and
# switched by a back-to-back MOSFET solid-state relay (no body-diode path), so the node rings
# freely both ways; then again with a 1 nF capacitor added from the node to ground.
ring=(--supply 0.5V --inductance 200mH --resistance 240 --parallel-resistance 100k
      --clamp none --no-body-diode --on-time 4ms --off-time 2ms --turn-off 300ns
      --events 1 --dt 500ns --noise 40mV --adc-bits 12 --adc-min -60 --adc-max 60)
sim "${ring[@]}" --capacitance 470pF --seed 601 -o "$here/ringdown/bare.csv"
sim "${ring[@]}" --capacitance 1470pF --seed 602 -o "$here/ringdown/loaded.csv"

//! The time column: the sample interval it holds, and the checks on each row (backwards,
//! gaps, jitter), allowing for the resolution the times were printed with.

use std::path::Path;

use super::text::SniffLine;
use super::{csv_err, row_cell_iter};
use crate::capture::cells::{
    bare_delimiter, last_digit_place, parse_number, pow10, trim_cell, Delim,
};
use crate::capture::decimal::{read_fast, read_prefix};
use crate::capture::CaptureError;

/// A time step this much longer than the sample interval is a gap, not jitter.
pub(super) const GAP_FACTOR: f64 = 1.5;
/// Relative step deviation above which time steps count as jittered.
pub(super) const JITTER_FRACTION: f64 = 0.01;

/// Digits after the decimal mark of a number cell's mantissa.
pub(super) fn decimals(cell: &[u8]) -> usize {
    let mantissa = cell
        .iter()
        .position(|&b| b == b'e' || b == b'E')
        .map_or(cell, |k| &cell[..k]);
    mantissa
        .iter()
        .position(|&b| b == b'.' || b == b',')
        .map_or(0, |k| mantissa.len() - k - 1)
}

/// Time values of the first data rows, in the file's unit, with their printed resolution
/// and number of decimals.
pub(super) fn window_times(
    lines: &[SniffLine],
    col: usize,
    n_fields: usize,
    delim: Delim,
    comma: bool,
) -> Vec<(f64, f64, usize)> {
    let mut out = Vec::with_capacity(lines.len());
    // Rows of bare numbers split by one byte (nearly all) are read straight through, each
    // cell up to where its number ends; any other row takes the general way below, which
    // gives the same for these.
    let bare = bare_delimiter(delim, comma);
    for l in lines {
        if let Some(t) =
            bare.and_then(|(d, comma)| bare_time_cell(l.text.as_bytes(), d, n_fields, col, comma))
        {
            out.push(t);
            continue;
        }
        if l.text.trim().is_empty() {
            continue;
        }
        let (mut n_cells, mut cell) = (0, None);
        for (k, c) in row_cell_iter(&l.text, delim).enumerate() {
            if k == col {
                cell = Some(c);
            }
            n_cells = k + 1;
        }
        if n_cells != n_fields {
            break;
        }
        let Some(cell) = cell.map(trim_cell) else {
            break;
        };
        // Plain decimals (nearly every time cell) give all three in one reading.
        if let Some(d) = read_fast(cell, comma) {
            out.push((d.value, pow10(d.last_place), d.decimals as usize));
            continue;
        }
        match parse_number(cell, comma) {
            Ok(t) => out.push((t, last_digit_place(cell), decimals(cell))),
            Err(_) => break,
        }
    }
    out
}

/// The time cell of a row of exactly `n_fields` cells split by `d`, the time cell a bare
/// number (value, printed resolution, decimals), or `None` for any other row. The other
/// cells are only counted, not read (the general way reads only the time cell too):
/// each must hold more than blanks and no quote, so it is one cell to the general way too
/// (which drops a blank last cell).
fn bare_time_cell(
    row: &[u8],
    d: u8,
    n_fields: usize,
    col: usize,
    comma: bool,
) -> Option<(f64, f64, usize)> {
    let mut at = 0;
    let mut time = None;
    for k in 0..n_fields {
        let rest = row.get(at..)?;
        if k == col {
            let (number, len) = read_prefix(rest, comma)?;
            at += len;
            time = Some((
                number.value,
                pow10(number.last_place),
                number.decimals as usize,
            ));
        } else {
            // One look at each byte of the (short) cell: where it ends, and that it holds
            // no quote and more than blanks. Two searches cost more than the cell.
            let mut len = 0;
            let mut filled = false;
            for &b in rest {
                if b == d {
                    break;
                }
                if b == b'"' {
                    return None;
                }
                filled |= !b.is_ascii_whitespace();
                len += 1;
            }
            if !filled {
                return None;
            }
            at += len;
        }
        match row.get(at) {
            Some(&b) if b == d && k + 1 < n_fields => at += 1,
            None if k + 1 == n_fields => {}
            _ => return None,
        }
    }
    time
}

fn median(v: &[f64]) -> Option<f64> {
    // Equal keys under total_cmp are equal bits: selecting gives what sorting gave.
    crate::levels::median_of(v.iter().copied(), v.len()).map(|(m, _)| m)
}

/// Whether times rise in equal steps (a time column without a header says so).
pub(super) fn looks_like_time(times: &[(f64, f64, usize)]) -> bool {
    if times.len() < 4 {
        return false;
    }
    let steps: Vec<f64> = times.windows(2).map(|w| w[1].0 - w[0].0).collect();
    let Some(m) = median(&steps) else {
        return false;
    };
    m > 0.0
        && times.windows(2).all(|w| {
            let tol = JITTER_FRACTION * m + w[0].1 + w[1].1;
            (w[1].0 - w[0].0 - m).abs() <= tol
        })
}

/// Per-row time checks while streaming.
pub(super) struct TimeCheck {
    /// Seconds per unit of the time column.
    pub(super) factor: f64,
    pub(super) dt_s: f64,
    /// Times written in full (shortest round-trip form): no rounding to allow for.
    pub(super) exact: bool,
    /// How `dt_s` was found over the first rows (`median step`, `mean step`).
    pub(super) dt_from: &'static str,
    /// The printed resolution when it is coarser than a quarter step (checks are loose).
    pub(super) coarse_resolution_s: Option<f64>,
    pub(super) prev: Option<(f64, f64)>,
    pub(super) steps: u64,
    pub(super) jittered: u64,
    pub(super) first_jitter_line: usize,
    pub(super) max_deviation: f64,
}

#[inline]
pub(super) fn check_time(
    file: &Path,
    tc: &mut TimeCheck,
    t_file: f64,
    q_file: f64,
    line: usize,
) -> Result<(), CaptureError> {
    let t = t_file * tc.factor;
    let q = if tc.exact {
        1e-6 * tc.dt_s + 1e-12 * t.abs()
    } else {
        q_file * tc.factor
    };
    if let Some((prev, prev_q)) = tc.prev {
        let step = t - prev;
        // Every check allows for rounding to the printed resolution of both times, so a
        // coarsely printed column is checked only as far as its digits allow.
        let rounding = q + prev_q;
        let dev = (step - tc.dt_s).abs();
        // Nearly every row: a step within the jitter allowance, with little rounding,
        // passes every check below, so the others are not made (all of them on every row
        // were a seventh of the time a long CSV took to read on one thread; the short cut
        // saves a third to a half of that). With rounding < dt/4 the allowance is under
        // 0.27 dt (rounded up), while going back (step <= 0) or a gap (step > 1.5 dt)
        // puts the step at least dt or dt/2 from dt; rounding each operation keeps
        // those bounds (it is monotone and dt/2, dt are exact), so `dev` is beyond the
        // allowance in each case.
        if rounding < 0.25 * tc.dt_s && dev <= JITTER_FRACTION * tc.dt_s + rounding {
            tc.steps += 1;
            tc.prev = Some((t, q));
            return Ok(());
        }
        if step < -rounding || (step <= 0.0 && rounding < 0.25 * tc.dt_s) {
            return Err(backwards(file, line, t, prev));
        }
        tc.steps += 1;
        if step > GAP_FACTOR * tc.dt_s + rounding {
            return Err(gap(file, line, step, tc.dt_s));
        }
        if dev > JITTER_FRACTION * tc.dt_s + rounding {
            if tc.jittered == 0 {
                tc.first_jitter_line = line;
            }
            tc.jittered += 1;
            tc.max_deviation = tc.max_deviation.max(dev / tc.dt_s);
        }
    }
    tc.prev = Some((t, q));
    Ok(())
}

/// Whether [`check_time`] passes by its short cut every row whose time is printed with
/// the place `q_file` (in the column's unit) and lies `units` of that place after the
/// previous row's time, printed with the same place, when both times are smaller than
/// `max_file`: so a run of such rows can be counted from the printed digits alone (see
/// `RowFormat::sci_pair_run`), without forming the times, and the check ends the same.
///
/// Both rows' `rounding` is then `q + q` and the allowance is fixed, computed here as the
/// check computes them. Only `dev` depends on the two times, through rounding errors: each
/// time carries two roundings (the number read, the unit factor), each within 2^-53 of
/// it, so within 2^-51 of `max_file * factor` together; the step and `dev` add one rounding
/// each. The step estimated here (`units * q`) carries a few more, `q` included (the
/// powers of ten come from `powi`). A slack of 2^-45 of the magnitudes involved bounds
/// all of these with a margin of sixteen, so the computed `dev` is below the allowance for
/// every such pair whenever the estimate plus the slack is.
pub(super) fn step_always_passes(tc: &TimeCheck, units: i64, q_file: f64, max_file: f64) -> bool {
    if tc.exact || units <= 0 {
        return false;
    }
    let q = q_file * tc.factor;
    let rounding = q + q;
    let allowance = JITTER_FRACTION * tc.dt_s + rounding;
    let step = units as f64 * q;
    let slack = ((max_file * tc.factor).abs() + step + tc.dt_s) * (1.0 / (1u64 << 45) as f64);
    rounding < 0.25 * tc.dt_s && (step - tc.dt_s).abs() + slack <= allowance
}

#[cold]
fn backwards(file: &Path, line: usize, t: f64, prev: f64) -> CaptureError {
    csv_err(
        file,
        line,
        1,
        format!(
            "time goes backwards or repeats ({:e} s after {:e} s); expected rising time",
            crate::capture::sig(t),
            crate::capture::sig(prev)
        ),
    )
}

#[cold]
fn gap(file: &Path, line: usize, step: f64, dt_s: f64) -> CaptureError {
    csv_err(
        file,
        line,
        1,
        format!(
            "gap in the time column: a step of {:e} s where the sample interval is {:e} s (missing rows before this line?)",
            crate::capture::sig(step),
            crate::capture::sig(dt_s)
        ),
    )
}

impl TimeCheck {
    /// The same check with nothing seen yet: for a stretch of rows checked on its own and
    /// joined to the rows before it later.
    pub(super) fn fresh(&self) -> TimeCheck {
        TimeCheck {
            prev: None,
            steps: 0,
            jittered: 0,
            first_jitter_line: 0,
            max_deviation: 0.0,
            ..*self
        }
    }

    /// The sample interval and the checks for the rest of the column, from the times of the
    /// first rows (in the file's unit; `factor` converts to seconds).
    pub(super) fn from_first_rows(times: &[(f64, f64, usize)], factor: f64) -> Option<TimeCheck> {
        let steps: Vec<f64> = times.windows(2).map(|w| w[1].0 - w[0].0).collect();
        // A zero is exact in any format; it says nothing about the printed resolution.
        let coarsest = times
            .iter()
            .filter(|t| t.0 != 0.0)
            .map(|t| t.1)
            .fold(0.0, f64::max)
            * factor;
        // A column printed more coarsely than it steps has a median step of zero; its mean
        // step over the window still holds the interval.
        let mean_step = match (times.first(), times.last()) {
            (Some(f), Some(l)) if times.len() >= 2 => (l.0 - f.0) / (times.len() - 1) as f64,
            _ => 0.0,
        };
        let med = median(&steps)
            .filter(|&m| m > 0.0)
            .or((mean_step > 0.0).then_some(mean_step))?;
        // The last printed digit bounds the rounding of a time (`%.3e`, `%.6f`, `%g`).
        // Shortest round-trip output of doubles (`3.0000000000000004e-9`) is exact: it shows
        // as a varying number of decimals, 10 or more in some cells.
        let mut nonzero: Vec<&(f64, f64, usize)> = Vec::with_capacity(times.len());
        nonzero.extend(times.iter().filter(|t| t.0 != 0.0));
        let same_decimals = nonzero.windows(2).all(|w| w[0].2 == w[1].2);
        let exact = !same_decimals && nonzero.iter().any(|t| t.2 >= 10);
        let q = |t: &(f64, f64, usize)| {
            if exact {
                1e-6 * med + 1e-12 * t.0.abs()
            } else {
                t.1
            }
        };
        // Evenly printed steps: the mean over the window is the finer estimate. Any jitter:
        // the median step, which the jitter does not pull.
        let even = times
            .windows(2)
            .all(|w| (w[1].0 - w[0].0 - med).abs() <= JITTER_FRACTION * med + q(&w[0]) + q(&w[1]));
        // The mean can be zero or less where the median is not: a column printed so coarsely
        // that it comes back to its first value within the window (fuzzing found one).
        let dt = if even && mean_step > 0.0 {
            mean_step
        } else {
            med
        } * factor;
        if !(dt.is_finite() && dt > 0.0) {
            return None;
        }
        Some(TimeCheck {
            factor,
            dt_s: dt,
            exact,
            dt_from: if even { "mean step" } else { "median step" },
            coarse_resolution_s: (!exact && coarsest > 0.25 * dt).then_some(coarsest),
            prev: None,
            steps: 0,
            jittered: 0,
            first_jitter_line: 0,
            max_deviation: 0.0,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fixed(times: &[f64], place: f64) -> Vec<(f64, f64, usize)> {
        times.iter().map(|&t| (t, place, 3)).collect()
    }

    proptest::proptest! {
        /// The fast reading of a time cell gives what the separate scans gave: the value,
        /// the printed resolution and the count of decimals.
        #[test]
        fn one_reading_of_a_time_cell_gives_what_three_did(
            s in "[-+]?[0-9]{1,8}([.,][0-9]{0,12})?([eE][-+]?[0-9]{1,3})?",
            comma: bool,
        ) {
            if let Some(d) = read_fast(s.as_bytes(), comma) {
                let cell = s.as_bytes();
                proptest::prop_assert_eq!(Ok(d.value), parse_number(cell, comma));
                proptest::prop_assert_eq!(pow10(d.last_place).to_bits(), last_digit_place(cell).to_bits());
                proptest::prop_assert_eq!(d.decimals as usize, decimals(cell));
            }
        }
    }

    /// A bare row's time cell read straight through is what splitting the row and reading
    /// the cell gives; rows that are not bare numbers are left to the general way.
    #[test]
    fn bare_rows_give_the_time_cell_the_general_way_gives() {
        for (row, d, comma) in [
            ("1.000000000e-07,-0.3922", b',', false),
            ("12,3.5,7", b',', false),
            ("-2.5e-3;1,25", b';', true),
            ("0.001\t5", b'\t', false),
        ] {
            let n = row.split(d as char).count();
            for col in 0..n {
                let got = bare_time_cell(row.as_bytes(), d, n, col, comma).unwrap();
                let cell = row.split(d as char).nth(col).unwrap().as_bytes();
                let want = (
                    parse_number(cell, comma).unwrap(),
                    last_digit_place(cell),
                    decimals(cell),
                );
                assert_eq!(got.0.to_bits(), want.0.to_bits(), "{row}");
                assert_eq!(got.1.to_bits(), want.1.to_bits(), "{row}");
                assert_eq!(got.2, want.2, "{row}");
            }
        }
        for row in [
            "",
            " 1,2",
            "1,2,",
            "1,,",
            "1, ",
            "1",
            "1,2,3",
            "1 ,2",
            "\"1\",2",
            "inf,2",
            "1,\"a,b\"",
        ] {
            assert_eq!(
                bare_time_cell(row.as_bytes(), b',', 2, 0, false),
                None,
                "{row}"
            );
        }
        // The other cells are counted, not read: whatever they hold, the time is the one
        // the general way (split the row, count the cells, read the time cell) gives.
        let general = |row: &str| {
            let cells: Vec<&[u8]> = row_cell_iter(row, Delim::Byte(b',')).collect();
            (cells.len() == 3)
                .then(|| parse_number(trim_cell(cells[1]), false).ok())
                .flatten()
        };
        for row in ["abc,2.5e-3,x y", "1,2.5e-3, 7", "-,0.125,1e999", "é,3,NaN"] {
            let got = bare_time_cell(row.as_bytes(), b',', 3, 1, false).map(|t| t.0);
            assert_eq!(got, general(row), "{row}");
            assert!(got.is_some(), "{row}");
        }
    }

    #[test]
    fn interval_from_the_first_rows() {
        // Times in us printed with 3 decimals: 2 ns steps.
        let t = fixed(&[-0.004, -0.002, 0.0, 0.002, 0.004], 1e-3);
        let c = TimeCheck::from_first_rows(&t, 1e-6).unwrap();
        assert!((c.dt_s - 2e-9).abs() < 1e-21);
        assert_eq!(c.dt_from, "mean step");
        assert!(!c.exact);
        // One step 10 % long: the median step, not the mean.
        let t = fixed(&[0.0, 1.0, 2.0, 3.1, 4.1, 5.1], 1e-3);
        let c = TimeCheck::from_first_rows(&t, 1.0).unwrap();
        assert_eq!(c.dt_s, 1.0);
        assert_eq!(c.dt_from, "median step");
    }

    /// Steps counted on printed digits: 20 ns samples printed as `%.9e` at the exponent
    /// -2 (`1.999996000e-02`) have a last place of 1e-11 s, so a step of 2000 counts is the
    /// interval. The check allows 1 % of it plus both times' rounding (2e-11 s): 2001
    /// counts (0.05 % off) always pass, 2300 (15 % off, jitter the check counts) do not,
    /// nor do steps back, nor any step where the place is as coarse as the interval.
    #[test]
    fn steps_that_always_pass_the_short_cut() {
        let t = fixed(&[0.0, 2e-8, 4e-8, 6e-8, 8e-8], 1e-17);
        let c = TimeCheck::from_first_rows(&t, 1.0).unwrap();
        assert!(!c.exact);
        let always = |units: i64, place: f64| step_always_passes(&c, units, place, 0.1);
        assert!(always(2000, 1e-11));
        assert!(always(2001, 1e-11));
        assert!(always(1999, 1e-11));
        assert!(!always(2300, 1e-11));
        assert!(!always(-2000, 1e-11));
        assert!(!always(0, 1e-11));
        // A place of 1e-8 s: rounding (2e-8 s) is not below a quarter step.
        assert!(!always(2, 1e-8));
        // A unit factor (ms) scales the place and the largest time alike.
        let ms = TimeCheck::from_first_rows(&fixed(&[0.0, 2e-5, 4e-5, 6e-5], 1e-14), 1e-3).unwrap();
        assert!(step_always_passes(&ms, 2000, 1e-8, 100.0));
        assert!(!step_always_passes(&ms, 2300, 1e-8, 100.0));
    }

    /// A column printed more coarsely than it steps that comes back to its first value
    /// (0,0 0,0025 0,0 0,0025 0,0: a fuzzed file) has a mean step of zero; the interval is
    /// the median step, never zero.
    #[test]
    fn a_column_back_at_its_first_value_still_has_a_positive_interval() {
        let t = [
            (0.0, 0.1, 1),
            (0.0025, 1e-4, 4),
            (0.0, 0.1, 1),
            (0.0025, 1e-4, 4),
            (0.0, 0.1, 1),
        ];
        let c = TimeCheck::from_first_rows(&t, 1.0).unwrap();
        assert_eq!(c.dt_s, 0.0025);
    }

    /// [`check_time`] as it was before the short cut for steps within the allowance: every
    /// check made on every row.
    fn check_time_in_full(
        file: &Path,
        tc: &mut TimeCheck,
        t_file: f64,
        q_file: f64,
        line: usize,
    ) -> Result<(), CaptureError> {
        let t = t_file * tc.factor;
        let q = if tc.exact {
            1e-6 * tc.dt_s + 1e-12 * t.abs()
        } else {
            q_file * tc.factor
        };
        if let Some((prev, prev_q)) = tc.prev {
            let step = t - prev;
            let rounding = q + prev_q;
            if step < -rounding || (step <= 0.0 && rounding < 0.25 * tc.dt_s) {
                return Err(backwards(file, line, t, prev));
            }
            tc.steps += 1;
            if step > GAP_FACTOR * tc.dt_s + rounding {
                return Err(gap(file, line, step, tc.dt_s));
            }
            let dev = (step - tc.dt_s).abs();
            if dev > JITTER_FRACTION * tc.dt_s + rounding {
                if tc.jittered == 0 {
                    tc.first_jitter_line = line;
                }
                tc.jittered += 1;
                tc.max_deviation = tc.max_deviation.max(dev / tc.dt_s);
            }
        }
        tc.prev = Some((t, q));
        Ok(())
    }

    fn state(tc: &TimeCheck) -> (Option<(u64, u64)>, u64, u64, usize, u64) {
        (
            tc.prev.map(|(t, q)| (t.to_bits(), q.to_bits())),
            tc.steps,
            tc.jittered,
            tc.first_jitter_line,
            tc.max_deviation.to_bits(),
        )
    }

    proptest::proptest! {
        /// The short cut changes nothing: rows of steps near the interval, at the jitter
        /// allowance's edge, backwards, repeated and gapped, printed finely, exactly or so
        /// coarsely that the rounding exceeds the step, give the same results and the same
        /// counts as every check made on every row.
        #[test]
        fn the_short_cut_gives_what_every_check_gives(
            dt_exp in -12i32..4,
            exact: bool,
            factor in proptest::sample::select(vec![1.0, 1e-3, 1e-6]),
            rows in proptest::collection::vec(
                (
                    proptest::sample::select(vec![
                        1.0, 0.99, 1.01, 0.9899999, 1.0100001, 1.5, 1.5000001, 2.0, 0.0,
                        -0.5, 0.25, 1e-9, 1e9,
                    ]),
                    -1e-3f64..1e-3,
                    proptest::sample::select(vec![0.0, 1e-12, 1e-6, 0.1, 0.2499, 0.25, 0.5, 2.0, 1e12]),
                ),
                1..40,
            ),
        ) {
            let dt = 10f64.powi(dt_exp);
            let tc = TimeCheck {
                factor,
                dt_s: dt,
                exact,
                dt_from: "mean step",
                coarse_resolution_s: None,
                prev: None,
                steps: 0,
                jittered: 0,
                first_jitter_line: 0,
                max_deviation: 0.0,
            };
            let (mut a, mut b) = (tc.fresh(), tc.fresh());
            let f = Path::new("t.csv");
            let mut t = 0.0;
            for (k, (ratio, wobble, q)) in rows.into_iter().enumerate() {
                t += (ratio + wobble) * dt / factor;
                let q = q * dt / factor;
                let got = check_time(f, &mut a, t, q, k).map_err(|e| e.to_string());
                let want = check_time_in_full(f, &mut b, t, q, k).map_err(|e| e.to_string());
                proptest::prop_assert_eq!(&got, &want);
                proptest::prop_assert_eq!(state(&a), state(&b));
                if got.is_err() {
                    break;
                }
            }
        }
    }

    #[test]
    fn row_checks_allow_for_printed_rounding() {
        let t = fixed(&[0.0, 1.0, 2.0, 3.0], 1e-3);
        let mut c = TimeCheck::from_first_rows(&t, 1.0).unwrap();
        let f = Path::new("r.csv");
        check_time(f, &mut c, 0.0, 1e-3, 2).unwrap();
        check_time(f, &mut c, 1.0, 1e-3, 3).unwrap();
        // 1.5 % long beyond a 0.2 % rounding allowance: jitter, counted.
        check_time(f, &mut c, 2.017, 1e-3, 4).unwrap();
        assert_eq!((c.jittered, c.first_jitter_line), (1, 4));
        let e = check_time(f, &mut c, 4.6, 1e-3, 5).unwrap_err().to_string();
        assert!(e.contains("line 5, column 1: gap"), "{e}");
        let mut c = TimeCheck::from_first_rows(&t, 1.0).unwrap();
        check_time(f, &mut c, 3.0, 1e-3, 2).unwrap();
        let e = check_time(f, &mut c, 2.0, 1e-3, 3).unwrap_err().to_string();
        assert!(e.contains("time goes backwards"), "{e}");
        // A repeat within the printed resolution of a coarse column is rounding.
        let mut c = TimeCheck::from_first_rows(&t, 1.0).unwrap();
        check_time(f, &mut c, 3.0, 1.0, 2).unwrap();
        check_time(f, &mut c, 3.0, 1.0, 3).unwrap();
    }
}

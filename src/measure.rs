//! Per-event measurements of a turn-off event, as DESIGN.md's table defines them.
//!
//! Terms follow IEEE Std 181-2011 (state levels, reference levels, transition duration,
//! overshoot aberration) where the standard has one.

use serde::{Deserialize, Serialize};

use crate::capture::AdcRange;
use crate::{events, levels};

mod event;
pub mod ring;
mod series;
pub mod states;
pub mod stream;

/// Which way the spike goes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Polarity {
    /// Low-side switch: the node flies up above the supply.
    #[default]
    Up,
    /// High-side switch: the node flies down below ground.
    Down,
}

/// The user's choice of polarity (`--polarity`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum PolarityChoice {
    #[default]
    Auto,
    Up,
    Down,
}

/// Where the current probe sits (`--current-through`), which decides which energies mean
/// something.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum CurrentThrough {
    #[default]
    Switch,
    Coil,
}

/// Which ringing `ring_freq_hz` reports.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum RingKind {
    /// Fast ring of the node capacitance with a small stray inductance (layout, switch).
    Parasitic,
    /// Slow ring of the coil inductance with the node capacitance (or a snubber).
    Coil,
}

/// Analysis settings that shape the measurement.
#[derive(Debug, Clone)]
pub struct MeasureOptions {
    pub polarity: PolarityChoice,
    /// Supply voltage (`--supply`).
    pub supply_v: Option<f64>,
    /// Switch rating (`--rating`), for warnings.
    pub rating_v: Option<f64>,
    /// Coil inductance (`--inductance`).
    pub inductance_h: Option<f64>,
    /// Coil current at turn-off when no current channel exists (`--coil-current`).
    pub coil_current_a: Option<f64>,
    pub current_through: CurrentThrough,
    /// Longest event window kept (`--max-window`).
    pub max_window_s: Option<f64>,
    /// Settle band as percent of the step (`--settle-band`, default 5).
    pub settle_band_pct: f64,
    /// On-state dwell before an edge counts (`--min-on-time`); derived from the data when
    /// `None`.
    pub min_on_time_s: Option<f64>,
}

impl Default for MeasureOptions {
    fn default() -> Self {
        MeasureOptions {
            polarity: PolarityChoice::Auto,
            supply_v: None,
            rating_v: None,
            inductance_h: None,
            coil_current_a: None,
            current_through: CurrentThrough::Switch,
            max_window_s: None,
            settle_band_pct: 5.0,
            min_on_time_s: None,
        }
    }
}

/// One capture's samples as the measurement sees them.
#[derive(Debug, Clone, Copy)]
pub struct Trace<'a> {
    /// Switch-node voltage, volts.
    pub v: &'a [f64],
    /// Coil or switch current, amperes, on the same time base.
    pub i: Option<&'a [f64]>,
    pub dt_s: f64,
    pub t0_s: f64,
    /// Digitiser range of the voltage channel, where known.
    pub adc: Option<AdcRange>,
}

/// Everything measured on one turn-off event. Field names carry units and are the JSON
/// contract (`kickscan.measure/1`); `None` serialises as null, never NaN. Deserialising
/// reads the events back from a table (`measure --from-table`).
#[derive(Debug, Clone, Serialize, Deserialize, Default, PartialEq)]
pub struct Event {
    pub index: usize,
    pub t_edge_s: f64,
    pub polarity: Polarity,
    pub v_on: f64,
    pub v_off: f64,
    pub peak_v: f64,
    pub switch_stress_v: f64,
    pub overshoot_v: f64,
    pub overshoot_pct: Option<f64>,
    pub t_peak_s: f64,
    pub rise_time_s: Option<f64>,
    pub slew_v_per_s: Option<f64>,
    pub spike_width_s: Option<f64>,
    pub decay_time_s: Option<f64>,
    pub ring_freq_hz: Option<f64>,
    pub ring_kind: Option<RingKind>,
    pub damping_ratio: Option<f64>,
    pub settle_time_s: Option<f64>,
    /// Half-width of the settle band actually used around `v_off` (the percentage of the
    /// step, widened to what noise and ADC resolution allow).
    pub settle_band_v: Option<f64>,
    pub volt_seconds: f64,
    pub energy_j: Option<f64>,
    pub clamp_energy_j: Option<f64>,
    pub energy_to_peak_j: Option<f64>,
    pub coil_energy_j: Option<f64>,
    /// Coil current at turn-off, from the current channel or `--coil-current`.
    pub i0_a: Option<f64>,
    /// Node capacitance from the ring frequency and `--inductance`.
    pub c_par_f: Option<f64>,
    /// Node capacitance from I0 / (dv/dt) on the rise, and the voltage range it holds for.
    pub c_par_slope_f: Option<f64>,
    pub c_par_slope_range_v: Option<[f64; 2]>,
    /// Model fit results (filled by `model`).
    pub fit_model: Option<String>,
    pub ring_alpha: Option<f64>,
    pub q_factor: Option<f64>,
    pub fit_rms_v: Option<f64>,
    pub peak_v_est: Option<f64>,
    pub peak_v_est_lower: Option<f64>,
    pub peak_v_est_upper: Option<f64>,
    pub clipped: bool,
    pub undersampled: bool,
    pub truncated: bool,
    /// Length of the event window analysed.
    pub window_s: f64,
}

/// The result of measuring one capture.
#[derive(Debug, Clone, Default)]
pub struct CaptureMeasurement {
    pub v_on: f64,
    pub v_off: f64,
    pub polarity: Polarity,
    pub events: Vec<Event>,
    pub warnings: Vec<String>,
    /// Sample index range `[start, end)` of each event's window, for plots and fits: from a
    /// little before the edge (half the preceding on run, at most a tenth of the window
    /// after the edge and at least 16 samples, so the pre-edge on level is in it) to the
    /// next turn-on, the end of the capture or `max_window_s` after the edge.
    pub windows: Vec<(usize, usize)>,
}

/// Errors that stop a capture from being measured at all.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum MeasureError {
    #[error("the signal has no two separate state levels (all samples within {spread_v:.3} V)")]
    NoStates { spread_v: f64 },
    #[error("the signal has {n} samples; at least {min} are needed")]
    TooShort { n: usize, min: usize },
    #[error("{0}")]
    Invalid(String),
    /// Reading the record again failed (streamed records are read more than once).
    #[error("{0}")]
    Read(String),
    #[error("interrupted")]
    Interrupted,
}

/// How many per-event notes a capture lists before counting the rest.
const MAX_REPEATED_NOTES: usize = 3;

/// Finds and measures every turn-off event of one capture.
///
/// Steps: noise and ADC step; the two state levels (histogram modes resolving the step,
/// replaced by another pair of candidate levels when that pair explains the events better:
/// see [`states`]); polarity; edges after an on-state dwell; each window measured; then the state levels
/// cross-checked against the level just before each edge and where each event settled.
/// When they disagree (a clamp plateau or a ringing tail outnumbering the off state) a
/// warning says so and the events are found and measured again with the local levels.
/// [`stream::measure_stream`] does the same on a record too long to hold in memory.
pub fn measure_trace(
    trace: &Trace,
    opts: &MeasureOptions,
) -> Result<CaptureMeasurement, MeasureError> {
    let v = trace.v;
    check_length_and_interval(v.len(), trace.dt_s)?;
    let mut warnings = Vec::new();
    let current = match trace.i {
        Some(i) if i.len() != v.len() => {
            warnings.push(format!(
                "the current channel has {} samples and the voltage {}; energies left out",
                i.len(),
                v.len()
            ));
            None
        }
        other => other,
    };
    let (lo, hi) = levels::finite_range(v).ok_or(MeasureError::NoStates { spread_v: 0.0 })?;
    let adc_step_v = trace
        .adc
        .and_then(|a| a.step_v)
        .or_else(|| levels::adc_step_estimate(v))
        .unwrap_or(0.0);
    let rough_sigma = levels::noise_sigma(v).unwrap_or(0.0);
    let survey = Survey::new(lo, hi, adc_step_v, rough_sigma, trace.dt_s, opts);
    let mut chosen = choose_levels(v, 1, &survey, opts, &mut warnings)?;

    let mut pass = 0;
    loop {
        let (v_on, v_off) = (chosen.v_on, chosen.v_off);
        let step = (v_off - v_on).abs();
        let sigma =
            levels::noise_sigma_where(v, |a, b| near_on(a, b, v_on, step)).unwrap_or(rough_sigma);
        let mut params = edge_params(v_on, v_off, sigma, adc_step_v);
        params.dwell_samples = survey
            .dwell_samples
            .unwrap_or_else(|| events::derive_dwell(&events::low_run_lengths(v, &params)));
        let scan = events::scan_edges(v, params);
        let windows = events::event_windows(&scan, v.len(), survey.max_samples);
        let cx = survey.context(v, current, trace, &chosen, sigma, opts);
        // Windows are measured independently, on all cores; results are kept in order.
        let measured: Vec<(Event, event::LocalLevels)> = {
            use rayon::prelude::*;
            windows
                .par_iter()
                .zip(&scan.edges)
                .enumerate()
                .map(|(index, (&(start, end, cut), &edge))| {
                    let w = event::Window {
                        index,
                        start,
                        end,
                        edge,
                        cut,
                        closed_by_turn_on: !cut && end < v.len(),
                    };
                    event::measure_event(&cx, &w)
                })
                .collect()
        };
        let mut found = Found::default();
        for (ev, local) in measured {
            found.add(ev, local);
        }
        if pass == 0 {
            if let Some(refined) = cross_check(&found, &chosen, sigma, &survey, &mut warnings) {
                chosen = refined;
                pass += 1;
                continue;
            }
        }
        let longest_runs = stream::longest_runs_near(v, [v_on, v_off], 2.0 * survey.resolution_v);
        let windows = windows.iter().map(|&(a, b, _)| (a, b)).collect();
        return Ok(conclude(
            found,
            windows,
            &chosen,
            longest_runs,
            warnings,
            opts,
        ));
    }
}

/// The least a record needs: enough samples and a usable sample interval.
fn check_length_and_interval(n: usize, dt_s: f64) -> Result<(), MeasureError> {
    const MIN_SAMPLES: usize = 16;
    if n < MIN_SAMPLES {
        return Err(MeasureError::TooShort {
            n,
            min: MIN_SAMPLES,
        });
    }
    if !(dt_s > 0.0 && dt_s.is_finite()) {
        return Err(MeasureError::Invalid(format!(
            "the sample interval must be a positive number of seconds, not {dt_s}"
        )));
    }
    Ok(())
}

/// Capture-wide figures the level choice and the edge rules start from.
#[derive(Debug, Clone)]
struct Survey {
    lo_v: f64,
    hi_v: f64,
    adc_step_v: f64,
    rough_sigma_v: f64,
    /// Finest detail the level histogram resolves.
    resolution_v: f64,
    /// Smallest separation of two states.
    separation_v: f64,
    /// `--min-on-time` in samples.
    dwell_samples: Option<usize>,
    /// `--max-window` in samples.
    max_samples: Option<usize>,
}

impl Survey {
    fn new(
        lo_v: f64,
        hi_v: f64,
        adc_step_v: f64,
        rough_sigma_v: f64,
        dt_s: f64,
        opts: &MeasureOptions,
    ) -> Survey {
        let range = hi_v - lo_v;
        Survey {
            lo_v,
            hi_v,
            adc_step_v,
            rough_sigma_v,
            resolution_v: (2.0 * rough_sigma_v).max(adc_step_v).max(range * 1e-5),
            // "Separate" means many noise deviations apart, not a fraction of the range.
            separation_v: (6.0 * rough_sigma_v + 2.0 * adc_step_v).max(range * 1e-3),
            dwell_samples: opts
                .min_on_time_s
                .filter(|t| *t > 0.0)
                .map(|t| ((t / dt_s).ceil() as usize).max(1)),
            max_samples: opts
                .max_window_s
                .filter(|m| *m > 0.0)
                .map(|m| (m / dt_s).ceil() as usize),
        }
    }

    /// The pair search's view, for a record taken every `stride` samples.
    fn setting(&self, opts: &MeasureOptions, stride: usize) -> states::Setting {
        let per = |n: usize| (n / stride.max(1)).max(1);
        states::Setting {
            resolution_v: self.resolution_v,
            separation_v: self.separation_v,
            sigma_v: self.rough_sigma_v,
            adc_step_v: self.adc_step_v,
            lo_v: self.lo_v,
            hi_v: self.hi_v,
            polarity: opts.polarity,
            dwell_samples: self.dwell_samples.map(per),
            max_samples: self.max_samples.map(per),
        }
    }

    /// What each event's measurement needs. `v` and `i` hold the samples from absolute
    /// index `trace`'s start; see [`event::Context`].
    fn context<'a>(
        &self,
        v: &'a [f64],
        i: Option<&'a [f64]>,
        trace: &Trace,
        chosen: &Chosen,
        sigma_v: f64,
        opts: &'a MeasureOptions,
    ) -> event::Context<'a> {
        let up = chosen.polarity == Polarity::Up;
        event::Context {
            v,
            i,
            dt_s: trace.dt_s,
            t0_s: trace.t0_s,
            first_index: 0,
            v_on: chosen.v_on,
            v_off: chosen.v_off,
            polarity: chosen.polarity,
            sigma_v,
            adc_step_v: self.adc_step_v,
            adc_rail_v: trace.adc.map(|a| if up { a.max_v } else { a.min_v }),
            extreme_v: if up { self.hi_v } else { self.lo_v },
            opts,
        }
    }
}

/// The state levels and polarity in use.
#[derive(Debug, Clone, Copy)]
struct Chosen {
    v_on: f64,
    v_off: f64,
    polarity: Polarity,
}

/// A first difference of the on state: both samples within a quarter step of it.
fn near_on(a: f64, b: f64, v_on: f64, step: f64) -> bool {
    (a - v_on).abs() < 0.25 * step && (b - v_on).abs() < 0.25 * step
}

/// Half-width of the edge detector's hysteresis band, in steps: four noise deviations (or
/// codes), kept between 5 % and 35 % of the step.
fn hysteresis_of(sigma_v: f64, adc_step_v: f64, step_v: f64) -> f64 {
    (4.0 * sigma_v.max(adc_step_v) / step_v).clamp(0.05, 0.35)
}

/// How far past the rail the switch's body diode holds the node once it conducts, less a
/// margin for noise (a silicon body diode conducts from about 0.5-0.7 V; common practice).
/// Samples beyond it are left out of fits, and are not the on state.
pub const BODY_DIODE_CLIP_V: f64 = 0.4;

/// The edge detector's floor, in steps (`EdgeParams::floor_f`): samples further beyond the
/// on level than the body diode's clip, or than six noise deviations and two codes when the
/// noise is larger (an on state's own noise never reaches past it), are not the on state.
fn floor_of(sigma_v: f64, adc_step_v: f64, step_v: f64) -> f64 {
    past_rail_v(sigma_v, adc_step_v) / step_v
}

/// How far past a rail (or the on level) a sample lies before it is a conducting diode's,
/// not the state's own noise: the body diode's clip, or six noise deviations and two codes
/// when the noise is larger.
fn past_rail_v(sigma_v: f64, adc_step_v: f64) -> f64 {
    BODY_DIODE_CLIP_V.max(6.0 * sigma_v + 2.0 * adc_step_v)
}

/// The edge detector's settings for these levels and this noise, its dwell left for the
/// caller to set (from `--min-on-time`, or from the runs these settings see).
fn edge_params(v_on: f64, v_off: f64, sigma_v: f64, adc_step_v: f64) -> events::EdgeParams {
    let step = (v_off - v_on).abs();
    events::EdgeParams {
        v_on,
        v_off,
        hysteresis_f: hysteresis_of(sigma_v, adc_step_v, step),
        dwell_samples: 0,
        floor_f: floor_of(sigma_v, adc_step_v, step),
    }
}

/// The two state levels and the polarity, from `v` (the whole record, or every `stride`-th
/// sample of a long one).
fn choose_levels(
    v: &[f64],
    stride: usize,
    survey: &Survey,
    opts: &MeasureOptions,
    warnings: &mut Vec<String>,
) -> Result<Chosen, MeasureError> {
    let states = levels::two_state_levels(v, survey.resolution_v, survey.separation_v).ok_or(
        MeasureError::NoStates {
            spread_v: survey.hi_v - survey.lo_v,
        },
    )?;
    let setting = survey.setting(opts, stride);
    // With the supply known the two states are ground and the supply, whichever side the
    // switch is on: take the level the samples hold near each (within 15 %, so a sagging
    // supply is still found). This also serves a record that ends before its only event
    // settles, where no off state is in the histogram at all.
    let (low_v, high_v) = match opts
        .supply_v
        .filter(|s| s.is_finite() && s.abs() > survey.separation_v)
    {
        Some(sup) => {
            // Not past a rail by more than a conducting diode holds it (the body diode
            // beyond ground, a freewheel diode beyond the supply: a stretch there can
            // outnumber a short on state or a settled off state, and was taken for it).
            let hw = 0.15 * sup.abs();
            let clip = past_rail_v(survey.rough_sigma_v, survey.adc_step_v);
            let (r_lo, r_hi) = (sup.min(0.0), sup.max(0.0));
            let within =
                |from: f64, to: f64| levels::level_near(v, 0.5 * (from + to), 0.5 * (to - from));
            let lo = within(r_lo - clip, r_lo + hw).unwrap_or(r_lo);
            let hi = within(r_hi - hw, r_hi + clip).unwrap_or(r_hi);
            (lo, hi)
        }
        // The histogram pair, unless another pair of candidate levels explains the events
        // better (a body-diode clip level on a clean record, see `states`).
        None => match states::better_pair(v, states.low_v, states.high_v, &setting) {
            Some(fit) => {
                warnings.push(format!(
                    "the most populated levels {:.4} V and {:.4} V do not explain the events (a clamped ring trough or a ringing tail?); using {:.4} V and {:.4} V, which do",
                    states.low_v, states.high_v, fit.low_v, fit.high_v
                ));
                (fit.low_v, fit.high_v)
            }
            None => (states.low_v, states.high_v),
        },
    };
    let polarity = states::polarity_of(low_v, high_v, &setting);
    // A forced direction the record plainly contradicts measures the wrong edges (the
    // turn-ons of a high-side switch taken for spikes): say so. "Plainly": the excursion
    // past the other level is three times the one past this level.
    let above = setting.hi_v - high_v;
    let below = low_v - setting.lo_v;
    let contradicted = match opts.polarity {
        PolarityChoice::Up => below > 3.0 * above + survey.separation_v,
        PolarityChoice::Down => above > 3.0 * below + survey.separation_v,
        PolarityChoice::Auto => false,
    };
    if contradicted {
        let (given, seen) = match polarity {
            Polarity::Up => ("up", "down (a high-side switch?)"),
            Polarity::Down => ("down", "up (a low-side switch?)"),
        };
        warnings.push(format!(
            "--polarity {given}, but the samples reach {below:.3} V below the low level and {above:.3} V above the high level: the spikes point {seen}; check the option"
        ));
    }
    let (v_on, v_off) = match polarity {
        Polarity::Up => (low_v, high_v),
        Polarity::Down => (high_v, low_v),
    };
    Ok(Chosen {
        v_on,
        v_off,
        polarity,
    })
}

/// Events measured in one pass, with the local levels they saw.
#[derive(Debug, Default)]
struct Found {
    events: Vec<Event>,
    befores: Vec<f64>,
    settleds: Vec<f64>,
    notes: Vec<String>,
}

impl Found {
    fn add(&mut self, ev: Event, local: event::LocalLevels) {
        self.befores.extend(local.before_edge_v);
        self.settleds.extend(local.settled_v);
        self.notes.extend(local.notes);
        self.events.push(ev);
    }
}

/// Cross-check of the histogram levels with the local ones; the levels for one more pass
/// when they should be corrected.
///
/// The local medians are precise to a fraction of the noise: a disagreement of one noise
/// deviation (or half a code) is worth a warning, and any disagreement beyond a quarter of
/// the noise is corrected, since every level-relative figure (crossings, settling, ring
/// peaks) inherits it.
fn cross_check(
    found: &Found,
    chosen: &Chosen,
    sigma_v: f64,
    survey: &Survey,
    warnings: &mut Vec<String>,
) -> Option<Chosen> {
    let (v_on, v_off) = (chosen.v_on, chosen.v_off);
    let step = (v_off - v_on).abs();
    let tol = sigma_v.max(0.5 * survey.adc_step_v).max(0.002 * step);
    let refine_tol = (0.25 * sigma_v).max(1e-4 * step);
    let mut new_on = v_on;
    let mut new_off = v_off;
    if let Some(l) = levels::median(&found.befores) {
        if (l - v_on).abs() > tol {
            warnings.push(format!(
                "on level {v_on:.4} V from the histogram differs from {l:.4} V seen before the edges; using {l:.4} V"
            ));
        }
        if (l - v_on).abs() > refine_tol {
            new_on = l;
        }
    }
    if let Some(l) = levels::median(&found.settleds) {
        if (l - v_off).abs() > tol {
            warnings.push(format!(
                "off level {v_off:.4} V from the histogram differs from {l:.4} V where the events settled (a clamp plateau or ringing tail outnumbers the off state?); using {l:.4} V"
            ));
        }
        if (l - v_off).abs() > refine_tol {
            new_off = l;
        }
    }
    let usable = (new_off - new_on).abs() > survey.separation_v;
    ((new_on != v_on || new_off != v_off) && usable).then_some(Chosen {
        v_on: new_on,
        v_off: new_off,
        polarity: chosen.polarity,
    })
}

/// A state holds for at least this many consecutive samples: a level the signal never
/// holds near for as long is warned about.
pub(crate) const MIN_STATE_RUN: usize = 32;

/// The measurement of a capture from its final pass: notes counted, level and capture
/// warnings added. `longest_runs` are the longest stretches held near the on and the off
/// level (see [`levels::longest_run_near`]); only whether each reaches [`MIN_STATE_RUN`]
/// matters, so a count may stop there.
fn conclude(
    found: Found,
    windows: Vec<(usize, usize)>,
    chosen: &Chosen,
    longest_runs: [usize; 2],
    mut warnings: Vec<String>,
    opts: &MeasureOptions,
) -> CaptureMeasurement {
    let Found { events, notes, .. } = found;
    // A note that holds for many events is said a few times, then counted.
    let n_notes = notes.len();
    warnings.extend(notes.into_iter().take(MAX_REPEATED_NOTES));
    if n_notes > MAX_REPEATED_NOTES {
        warnings.push(format!(
            "... and {} more event notes like the ones above",
            n_notes - MAX_REPEATED_NOTES
        ));
    }
    for ((which, level), run) in [("on", chosen.v_on), ("off", chosen.v_off)]
        .into_iter()
        .zip(longest_runs)
    {
        if opts.supply_v.is_none() && run < MIN_STATE_RUN {
            warnings.push(format!(
                "the signal never holds near the {which} level {level:.3} V for {MIN_STATE_RUN} samples: the record may end before the events settle; give --supply for dependable levels"
            ));
        }
    }
    capture_warnings(
        &mut warnings,
        &events,
        chosen.v_on,
        chosen.v_off,
        chosen.polarity,
        opts,
    );
    CaptureMeasurement {
        v_on: chosen.v_on,
        v_off: chosen.v_off,
        polarity: chosen.polarity,
        events,
        warnings,
        windows,
    }
}

/// Things the user should know about a capture's events.
fn capture_warnings(
    warnings: &mut Vec<String>,
    evs: &[Event],
    v_on: f64,
    v_off: f64,
    polarity: Polarity,
    opts: &MeasureOptions,
) {
    if evs.is_empty() {
        warnings.push(format!(
            "no turn-off edge found between the on level {v_on:.3} V and the off level {v_off:.3} V"
        ));
    }
    if let Some(supply) = opts.supply_v {
        let seen = match polarity {
            Polarity::Up => v_off,
            Polarity::Down => v_on,
        };
        let which = match polarity {
            Polarity::Up => "off",
            Polarity::Down => "on",
        };
        if supply != 0.0 && ((seen - supply) / supply).abs() > 0.05 {
            warnings.push(format!(
                "{which} level {seen:.2} V differs from --supply {supply} V by {:.0} %",
                ((seen - supply) / supply).abs() * 100.0
            ));
        }
    }
    if let Some(r) = opts.rating_v {
        let over: Vec<&Event> = evs.iter().filter(|e| e.switch_stress_v > r).collect();
        if let Some(worst) = over
            .iter()
            .max_by(|a, b| a.switch_stress_v.total_cmp(&b.switch_stress_v))
        {
            warnings.push(format!(
                "{} of {} events exceed the rating {r} V (worst: event {}, switch stress {:.1} V)",
                over.len(),
                evs.len(),
                worst.index,
                worst.switch_stress_v
            ));
        }
    }
    let clipped: Vec<String> = evs
        .iter()
        .filter(|e| e.clipped)
        .map(|e| e.index.to_string())
        .collect();
    if !clipped.is_empty() {
        let shown = clipped
            .iter()
            .take(8)
            .cloned()
            .collect::<Vec<_>>()
            .join(", ");
        let more = if clipped.len() > 8 {
            format!(" and {} more", clipped.len() - 8)
        } else {
            String::new()
        };
        warnings.push(format!(
            "{} event(s) clipped at the ADC rail (events {shown}{more}): their peak_v is a lower bound",
            clipped.len()
        ));
    }
    let n_under = evs.iter().filter(|e| e.undersampled).count();
    if n_under > 0 {
        warnings.push(format!(
            "{n_under} event(s) have fewer than 10 samples across the main lobe or a ring period; times and frequencies are coarse"
        ));
    }
}

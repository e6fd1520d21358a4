//! Numbers as engineers read them: engineering notation (exponent a multiple of three,
//! written as an SI prefix), three significant figures, ASCII `u` for micro so terminals and
//! CSV viewers never mangle it. Every human-facing number of the report goes through here.

pub use crate::units::{eng, eng_sig, MISSING};
use crate::units::{exp3_of, prefix_for};

/// [`eng`] for an optional value; `None` gives [`MISSING`].
pub fn eng_opt(value: Option<f64>, unit: &str) -> String {
    value.map_or_else(|| MISSING.to_string(), |v| eng(v, unit))
}

/// A percentage with sensible precision: `"4120 %"`, `"87.3 %"`, `"5.20 %"`.
pub fn pct(value: f64) -> String {
    if !value.is_finite() {
        return MISSING.to_string();
    }
    let a = value.abs();
    if a >= 100.0 {
        format!("{value:.0} %")
    } else if a >= 10.0 {
        format!("{value:.1} %")
    } else {
        format!("{value:.2} %")
    }
}

/// A plain number with three significant figures and no prefix (ratios such as the
/// damping ratio): `"0.0520"`, `"1.20"`. Very small or large values fall back to `e`
/// notation.
pub fn plain(value: f64) -> String {
    if !value.is_finite() {
        return MISSING.to_string();
    }
    let a = value.abs();
    if a != 0.0 && !(1e-3..1e6).contains(&a) {
        return format!("{value:.2e}");
    }
    let decimals = if a == 0.0 {
        2
    } else {
        (2 - a.log10().floor() as i64).max(0) as usize
    };
    format!("{value:.decimals$}")
}

/// A count with thin grouping for readability: `1234567` is `"1 234 567"`.
pub fn count(n: usize) -> String {
    let digits = n.to_string();
    let mut out = String::with_capacity(digits.len() + digits.len() / 3);
    for (k, ch) in digits.chars().enumerate() {
        if k > 0 && (digits.len() - k).is_multiple_of(3) {
            out.push(' ');
        }
        out.push(ch);
    }
    out
}

/// The scale and prefixed unit for a plot axis whose values reach `max_abs`: values are
/// multiplied by `factor` and the axis is labelled in `unit` (e.g. `"us"`).
#[derive(Debug, Clone, PartialEq)]
pub struct AxisUnit {
    pub factor: f64,
    pub unit: String,
}

/// Picks the prefix that puts `max_abs` between 1 and 1000 in axis units.
pub fn axis_unit(max_abs: f64, unit: &str) -> AxisUnit {
    let exp3 = exp3_of(max_abs.abs());
    AxisUnit {
        factor: 10f64.powi(-exp3),
        unit: format!("{}{unit}", prefix_for(exp3)),
    }
}

/// The unit and a short human name of a JSON field of `kickscan.measure/1`, from the unit
/// suffix its name carries.
pub fn field_unit(field: &str) -> &'static str {
    if field == "volt_seconds" {
        "Vs"
    } else if field.ends_with("_pct") {
        "%"
    } else if field.ends_with("_v_per_s") {
        "V/s"
    } else if field.ends_with("_hz") {
        "Hz"
    } else if field.ends_with("_j") {
        "J"
    } else if field.ends_with("_f") {
        "F"
    } else if field.ends_with("_s") {
        "s"
    } else if field.ends_with("_a") {
        "A"
    } else if field.ends_with("_v") || field == "v_on" || field == "v_off" {
        "V"
    } else {
        ""
    }
}

/// A value of a named field, formatted by its unit.
pub fn field_value(field: &str, value: f64) -> String {
    match field_unit(field) {
        "%" => pct(value),
        "" => plain(value),
        unit => eng(value, unit),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Expected strings follow the engineering-notation convention (exponent a multiple of 3,
    // SI prefix, three significant figures): common practice of the trade.
    #[test]
    fn engineering_notation() {
        assert_eq!(eng(412.0, "V"), "412 V");
        assert_eq!(eng(3.52e-5, "s"), "35.2 us");
        assert_eq!(eng(1.24e6, "Hz"), "1.24 MHz");
        assert_eq!(eng(5.6e-4, "J"), "560 uJ");
        assert_eq!(eng(0.056, "J"), "56.0 mJ");
        assert_eq!(eng(-412.4, "V"), "-412 V");
        assert_eq!(eng(1.0, "V"), "1.00 V");
        assert_eq!(eng(0.0, "V"), "0.00 V");
        assert_eq!(eng(220e-12, "F"), "220 pF");
        assert_eq!(eng(1.5e-9, "s"), "1.50 ns");
        assert_eq!(eng(12.0, ""), "12.0");
        assert_eq!(eng(1500.0, ""), "1.50 k");
    }

    #[test]
    fn rounding_carries_to_the_next_prefix() {
        assert_eq!(eng(999.7, "V"), "1.00 kV");
        assert_eq!(eng(0.99996, "s"), "1.00 s");
        assert_eq!(eng(999.4e-9, "s"), "999 ns");
    }

    #[test]
    fn missing_and_extreme_values() {
        assert_eq!(eng(f64::NAN, "V"), MISSING);
        assert_eq!(eng(f64::INFINITY, "V"), MISSING);
        assert_eq!(eng_opt(None, "V"), MISSING);
        assert_eq!(eng_opt(Some(24.0), "V"), "24.0 V");
        // Beyond the prefix table the mantissa grows rather than inventing a prefix.
        assert_eq!(eng(2e-18, "F"), "0.00200 fF");
        assert_eq!(eng(5e15, "Hz"), "5000 THz");
    }

    #[test]
    fn percentages_ratios_and_counts() {
        assert_eq!(pct(4123.4), "4123 %");
        assert_eq!(pct(87.34), "87.3 %");
        assert_eq!(pct(5.2), "5.20 %");
        assert_eq!(plain(0.052), "0.0520");
        assert_eq!(plain(1.2), "1.20");
        assert_eq!(plain(123.4), "123");
        assert_eq!(plain(2e-5), "2.00e-5");
        assert_eq!(count(1234567), "1 234 567");
        assert_eq!(count(12), "12");
        assert_eq!(count(0), "0");
    }

    #[test]
    fn axis_units_put_values_between_1_and_1000() {
        let a = axis_unit(3.5e-5, "s");
        assert_eq!(a.unit, "us");
        assert!((a.factor - 1e6).abs() < 1e-6);
        let b = axis_unit(412.0, "V");
        assert_eq!(b.unit, "V");
        assert_eq!(b.factor, 1.0);
        let c = axis_unit(0.0, "V");
        assert_eq!(c.unit, "V");
    }

    #[test]
    fn field_units_follow_the_name_suffix() {
        assert_eq!(field_unit("switch_stress_v"), "V");
        assert_eq!(field_unit("decay_time_s"), "s");
        assert_eq!(field_unit("ring_freq_hz"), "Hz");
        assert_eq!(field_unit("slew_v_per_s"), "V/s");
        assert_eq!(field_unit("overshoot_pct"), "%");
        assert_eq!(field_unit("damping_ratio"), "");
        assert_eq!(field_unit("c_par_f"), "F");
        assert_eq!(field_unit("volt_seconds"), "Vs");
        assert_eq!(field_value("energy_j", 5.6e-4), "560 uJ");
    }
}

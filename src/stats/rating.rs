//! Margin of a metric (switch stress) against the switch's voltage rating.

use crate::document::RatingMargin;

/// Fraction of the rating used as the derating line (common practice: 80 % of the
/// absolute-maximum rating for a design's worst case).
pub const DERATING_FRACTION: f64 = 0.8;

/// Counts over the rating and over the derated line, the worst value as a fraction of the
/// rating, and the per-switching exceedance probability from an extreme-value fit where the
/// caller has one (`ExtremeValueReport::p_exceed_rating_per_event`). None when the rating is
/// not a positive number or no value is finite.
pub fn rating_margin(
    values: &[f64],
    rating_v: f64,
    p_over_per_event: Option<f64>,
) -> Option<RatingMargin> {
    if !super::above(rating_v, 0.0) || !rating_v.is_finite() {
        return None;
    }
    let derated_v = DERATING_FRACTION * rating_v;
    let finite = values.iter().copied().filter(|v| v.is_finite());
    let worst = finite.clone().max_by(f64::total_cmp)?;
    Some(RatingMargin {
        rating_v,
        derated_v,
        max_fraction: worst / rating_v,
        n_over: finite.clone().filter(|&v| v > rating_v).count(),
        n_over_derated: finite.filter(|&v| v > derated_v).count(),
        p_over_per_event,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn counts_and_fraction() {
        // rating 60 V: derated line 48 V; 61 is over both, 50 over the derated line only
        let m = rating_margin(&[30.0, 50.0, 61.0, f64::NAN, 47.9], 60.0, Some(1e-9)).unwrap();
        assert_eq!(m.derated_v, 48.0);
        assert_eq!(m.n_over, 1);
        assert_eq!(m.n_over_derated, 2);
        assert!((m.max_fraction - 61.0 / 60.0).abs() < 1e-15);
        assert_eq!(m.p_over_per_event, Some(1e-9));
        assert!(rating_margin(&[1.0], 0.0, None).is_none());
        assert!(rating_margin(&[f64::NAN], 10.0, None).is_none());
    }
}

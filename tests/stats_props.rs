//! Property checks: the statistics never panic and never put NaN into a result, whatever the
//! input (arbitrary finite and non-finite values, empty slices, odd block lengths).

use kickscan::stats::{
    compare, extreme_value, mann_whitney_u, summarize, ExtremeValueReport, ReturnLevel,
};
use proptest::prelude::*;

fn value() -> impl Strategy<Value = f64> {
    prop_oneof![
        8 => -1e3f64..1e3,
        1 => Just(f64::NAN),
        1 => Just(f64::INFINITY),
        1 => Just(5.0),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    #[test]
    fn summary_is_ordered_and_finite(v in prop::collection::vec(value(), 0..300)) {
        let s = summarize(&v);
        if s.n > 0 {
            let (min, p50, p95, p99, max) =
                (s.min.unwrap(), s.p50.unwrap(), s.p95.unwrap(), s.p99.unwrap(), s.max.unwrap());
            prop_assert!(min <= p50 && p50 <= p95 && p95 <= p99 && p99 <= max);
            prop_assert!(s.mean.unwrap().is_finite());
        } else {
            prop_assert!(s.mean.is_none());
        }
    }

    #[test]
    fn rank_test_p_value_is_a_probability(
        a in prop::collection::vec(value(), 0..40),
        b in prop::collection::vec(value(), 0..40),
    ) {
        if let Ok(r) = mann_whitney_u(&a, &b) {
            if let Some(p) = r.p_value {
                prop_assert!((0.0..=1.0).contains(&p));
            }
        }
        let c = compare(&a, &b);
        prop_assert!(c.median_difference.is_none_or(|d| d.is_finite()));
    }

    #[test]
    fn extreme_value_report_has_no_nan(
        v in prop::collection::vec(value(), 0..400),
        block in 0usize..25,
        rating in prop::option::of(-10.0f64..2e3),
    ) {
        let r = extreme_value(&v, block, &[1e3, 1e6], rating);
        // serde_json would quietly write a NaN as null, so look at the numbers themselves
        prop_assert!(all_finite(&r), "{:?}", r);
        if let Some(p) = r.p_exceed_rating_per_event {
            prop_assert!((0.0..=1.0).contains(&p));
        }
    }
}

fn ok(x: Option<f64>) -> bool {
    x.is_none_or(f64::is_finite)
}

fn levels_ok(levels: &[ReturnLevel]) -> bool {
    levels.iter().all(|l| {
        l.level.is_finite()
            && ok(l.std_error)
            && ok(l.delta.lower)
            && ok(l.delta.upper)
            && l.profile
                .as_ref()
                .is_none_or(|p| ok(p.lower) && ok(p.upper))
    })
}

fn all_finite(r: &ExtremeValueReport) -> bool {
    let top = [
        r.location,
        r.scale,
        r.shape,
        r.upper_end_point,
        r.rating,
        r.p_exceed_rating_per_event,
        r.model_choice.deviance,
        r.model_choice.p_value,
    ];
    let entries = r
        .return_levels
        .0
        .iter()
        .all(|(_, e)| e.level.is_finite() && ok(e.lower) && ok(e.upper));
    let gumbel = r.gumbel.as_ref().is_none_or(|g| {
        g.fit.location.is_finite()
            && g.fit.scale.is_finite()
            && g.fit.log_likelihood.is_finite()
            && levels_ok(&g.return_levels)
            && ok(g.p_exceed_rating_per_event)
    });
    let gev = r.gev.as_ref().is_none_or(|g| {
        g.fit.location.is_finite()
            && g.fit.scale.is_finite()
            && g.fit.shape.is_finite()
            && g.fit.log_likelihood.is_finite()
            && ok(g.fit.upper_end_point)
            && g.fit
                .std_errors
                .is_none_or(|s| s.iter().all(|v| v.is_finite()))
            && levels_ok(&g.return_levels)
            && ok(g.p_exceed_rating_per_event)
    });
    let pot = r.pot.as_ref().is_none_or(|g| {
        g.fit.threshold.is_finite()
            && g.fit.scale.is_finite()
            && g.fit.shape.is_finite()
            && g.fit.log_likelihood.is_finite()
            && ok(g.fit.upper_end_point)
            && g.fit
                .std_errors
                .is_none_or(|s| s.iter().all(|v| v.is_finite()))
            && levels_ok(&g.return_levels)
            && ok(g.p_exceed_rating_per_event)
    });
    top.into_iter().all(ok) && entries && gumbel && gev && pot
}

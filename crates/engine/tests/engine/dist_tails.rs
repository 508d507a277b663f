//! Distribution tails and quantiles compared with scipy.stats at extreme tails
//! (tests/fixtures/dist/tails.json: scipy 1.16.3 `t`, `f`, `chi2`, `norm` `sf`/`ppf`/`isf`,
//! p down to 1e-12, df 1 to 1e5).
//!
//! Tolerances follow the fixture README's measurement of scipy's own errors against 60-digit
//! arithmetic: t and F quantiles, and F tails with a denominator df of 1e5, carry scipy errors
//! up to about 8e-11, so they are compared at relative 1e-9; the other families are good to
//! about 1e-14 in scipy and are compared at 2e-10, which is the accuracy of statrs'
//! regularised incomplete beta for half-integer parameters up to 5·10⁴ (its log-gamma
//! prefactor loses about 11 digits there; measured against mpmath in development).

use serde_json::Value;
use wardcast_engine::dist;

use crate::common::{assert_close, fixture, num};

/// Runs `f` over one family of entries, comparing with the stored value at `rel`, and returns
/// the largest relative error seen.
fn check(family: &str, rel: impl Fn(&Value) -> f64, f: impl Fn(&Value) -> f64) -> f64 {
    let all = fixture("dist/tails.json");
    let entries = all[family].as_array().unwrap_or_else(|| panic!("family {family}"));
    assert!(!entries.is_empty(), "{family}: no entries");
    let mut worst = 0.0_f64;
    let mut at = String::new();
    for e in entries {
        let want = num(&e["value"]);
        let got = f(e);
        assert_close(&format!("{family} {e}"), got, want, rel(e), 0.0);
        let err = ((got - want) / want).abs();
        if err > worst {
            worst = err;
            at = format!("{e} (got {got:e})");
        }
    }
    println!("{family:<8} {:>4} entries, worst relative error {worst:.1e} at {at}", entries.len());
    worst
}

/// Quantiles are tested at the written `p`, or at the exact complement `q` where given.
fn quantile(e: &Value, lower: impl Fn(f64) -> f64, upper: impl Fn(f64) -> f64) -> f64 {
    match e.get("q") {
        Some(q) => upper(num(q)),
        None => lower(num(&e["p"])),
    }
}

#[test]
fn t_tails_and_quantiles_match_scipy() {
    check("t_sf", |_| 1e-11, |e| dist::t_sf(num(&e["x"]), num(&e["df"])));
    check(
        "t_ppf",
        |_| 1e-9,
        |e| {
            let df = num(&e["df"]);
            quantile(e, |p| dist::t_quantile(p, df), |q| dist::t_isf(q, df))
        },
    );
}

#[test]
fn f_tails_and_quantiles_match_scipy() {
    check(
        "f_sf",
        |e| if num(&e["d2"]) >= 1e5 { 1e-9 } else { 1e-11 },
        |e| dist::f_sf(num(&e["x"]), num(&e["d1"]), num(&e["d2"])),
    );
    check(
        "f_ppf",
        |_| 1e-9,
        |e| {
            let (d1, d2) = (num(&e["d1"]), num(&e["d2"]));
            quantile(e, |p| dist::f_quantile(p, d1, d2), |q| dist::f_isf(q, d1, d2))
        },
    );
}

#[test]
fn chi2_and_normal_match_scipy() {
    check("chi2_sf", |_| 1e-13, |e| dist::chi2_sf(num(&e["x"]), num(&e["df"])));
    check("norm_sf", |_| 1e-13, |e| dist::norm_sf(num(&e["x"])));
    check("norm_ppf", |_| 1e-13, |e| quantile(e, dist::norm_quantile, dist::norm_isf));
}

#[test]
fn two_sided_p_is_twice_the_upper_tail() {
    // Identity of the definitions: P(|T| ≥ t) = 2·P(T > t) for t > 0.
    for &(t, df) in &[(0.3, 1.0), (2.5, 7.0), (40.0, 3.0), (8.0, 1e5)] {
        assert_close("two-sided p", dist::t_two_sided_p(t, df), 2.0 * dist::t_sf(t, df), 1e-14, 0.0);
    }
}

//! Special functions and Lambertian limits against independent references computed by
//! `tests/reference/gen_limits.py` (numpy, scipy.special.expn, pvlib's copy of ASTM G173-03,
//! and M. A. Green's 2008 silicon data in data/nk/si_green2008.csv), committed as
//! `tests/reference/gen_limits.json`.
//!
//! Lambertian limit: T. Tiedje, E. Yablonovitch, G. D. Cody & B. G. Brooks, IEEE Trans.
//! Electron Devices 31, 711 (1984); E. Yablonovitch, J. Opt. Soc. Am. 72, 899 (1982).
//! Context only (not compared): A. Richter, M. Hermle & S. W. Glunz, IEEE J. Photovolt. 3,
//! 1184 (2013) include free-carrier absorption in their limiting currents, so theirs differ.

use lightfold::wafer::limits::{
    alpha_per_cm, double_pass, lambertian_exact, single_pass, tiedje_yablonovitch,
};
use lightfold::wafer::special::expint_en;
use serde_json::Value;

fn reference() -> Value {
    let text = include_str!("reference/gen_limits.json");
    serde_json::from_str(text).expect("tests/reference/gen_limits.json parses")
}

#[test]
fn exponential_integrals_match_scipy_expn() {
    let r = reference();
    let rows = r["expn"].as_array().unwrap();
    assert!(rows.len() >= 70);
    for row in rows {
        let n = row["n"].as_u64().unwrap() as u32;
        let x = row["x"].as_f64().unwrap();
        let want = row["value"].as_f64().unwrap();
        let got = expint_en(n, x);
        let rel = if want == 0.0 {
            got.abs()
        } else {
            (got / want - 1.0).abs()
        };
        assert!(
            rel < 1e-13,
            "E_{n}({x}) = {got:e}, scipy {want:e}, rel {rel:e}"
        );
    }
}

#[test]
fn limit_absorptances_match_reference_pointwise() {
    let r = reference();
    for row in r["pointwise"].as_array().unwrap() {
        let f = |k: &str| row[k].as_f64().unwrap();
        let (w, wl, n, k) = (f("thickness_um"), f("wavelength_nm"), f("n"), f("k"));
        let a = alpha_per_cm(k, wl);
        for (name, got) in [
            ("single_pass", single_pass(a, w)),
            ("double_pass", double_pass(a, w)),
            ("tiedje_yablonovitch", tiedje_yablonovitch(a, w, n)),
            ("lambertian_exact", lambertian_exact(a, w, n)),
        ] {
            let want = f(name);
            assert!(
                (got - want).abs() < 1e-12 * want.max(1e-3),
                "{name} at {wl} nm, W = {w}: {got} vs {want}"
            );
        }
    }
}

/// J of the four references from lightfold's materials (si-green2008) and spectrum (AM1.5G)
/// modules, on `grid` (nm).
fn summary_on(grid: &[f64], w: f64) -> lightfold::wafer::limits::LimitSummary {
    let si = lightfold::optics::materials::by_id("si-green2008").unwrap();
    let (n, k): (Vec<f64>, Vec<f64>) = grid
        .iter()
        .map(|wl| {
            let i = si.index_at(*wl).unwrap();
            (i.re, i.im)
        })
        .unzip();
    let spectrum = lightfold::spectrum::Spectrum::am15g();
    lightfold::wafer::limits::limit_summary(spectrum, grid, &n, &k, w).unwrap()
}

#[test]
fn lambertian_photocurrents_match_independent_quadrature() {
    let r = reference();
    let spectrum = lightfold::spectrum::Spectrum::am15g();
    let native: Vec<f64> = spectrum
        .wavelength_nm()
        .iter()
        .copied()
        .filter(|wl| (300.0..=1200.0).contains(wl))
        .collect();
    let grid10: Vec<f64> = (0..=90).map(|i| 300.0 + 10.0 * i as f64).collect();
    for rec in r["photocurrent"].as_array().unwrap() {
        let w = rec["thickness_um"].as_f64().unwrap();
        for (variant, grid) in [("native", &native), ("grid10", &grid10)] {
            let s = summary_on(grid, w);
            for (name, got) in [
                ("tiedje_yablonovitch", s.tiedje_yablonovitch_ma_cm2),
                ("lambertian_exact", s.lambertian_exact_ma_cm2),
                ("single_pass", s.single_pass_ma_cm2),
                ("double_pass", s.double_pass_ma_cm2),
            ] {
                let want = rec[format!("{name}_{variant}_ma_cm2")].as_f64().unwrap();
                // Same quadrature on both sides (trapezoid on the G173 wavelengths): only
                // round-off and the interpolation of n, k differ.
                assert!(
                    (got - want).abs() < 1e-6,
                    "{name} {variant} W = {w}: {got} vs {want} mA/cm²"
                );
            }
            // The exact Lambertian wafer sits below TY by 0.05–0.2 mA/cm² (module doc).
            let gap = s.tiedje_yablonovitch_ma_cm2 - s.lambertian_exact_ma_cm2;
            assert!(gap > 0.05 && gap < 0.2, "TY − exact = {gap} at W = {w}");
        }
    }
    let s = summary_on(&grid10, 160.0);
    assert!((s.max_to_gap_ma_cm2 - r["max_ma_cm2_300_1107"].as_f64().unwrap()).abs() < 1e-6);
    assert!((s.max_band_ma_cm2 - r["max_ma_cm2_300_1200"].as_f64().unwrap()).abs() < 1e-6);
}

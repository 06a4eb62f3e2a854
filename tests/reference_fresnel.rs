//! Fresnel coefficients, Snell's law and the Mueller matrices of a bare interface against
//! textbook identities (M. Born & E. Wolf, *Principles of Optics*, 7th ed., Cambridge Univ.
//! Press 1999, §1.5) and against the `tmm` package (S. J. Byrnes, arXiv:1603.02720; values
//! in tests/reference/fresnel_tmm.json, made by tests/reference/gen_fresnel.py).

use lightfold::optics::{Fresnel, Index, Mueller, Stokes};
use num_complex::Complex64;

fn c(re: f64, im: f64) -> Index {
    Complex64::new(re, im)
}

/// Cosine of an angle given in degrees.
fn cos_deg(angle_deg: f64) -> f64 {
    angle_deg.to_radians().cos()
}

#[test]
fn normal_incidence_reflectance_is_born_wolf_formula() {
    // Born & Wolf (1999) §1.5.3: at normal incidence R = |(N − 1)/(N + 1)|² from vacuum.
    // Indices: glass, Si at 600 nm (Green 2008: 3.94 + 0.0199i), a metal-like index.
    for n in [c(1.5, 0.0), c(3.94, 0.019934), c(0.05, 4.0), c(1.2, 10.0)] {
        let expected = ((n - 1.0) / (n + 1.0)).norm_sqr();
        let f = Fresnel::new(c(1.0, 0.0), n, 1.0);
        assert!((f.reflectance_s() - expected).abs() < 1e-15, "N = {n}");
        assert!((f.reflectance_p() - expected).abs() < 1e-15, "N = {n}");
    }
    // Worked number: glass n = 1.5 reflects 4 % (Born & Wolf §1.5.3).
    let r = Fresnel::new(c(1.0, 0.0), c(1.5, 0.0), 1.0).reflectance_unpolarised();
    assert!((r - 0.04).abs() < 1e-15, "R = {r}");
}

#[test]
fn p_reflectance_vanishes_at_brewster_angle() {
    // Born & Wolf (1999) §1.5.3: tan θ_B = n2/n1 gives r_p = 0, from either side.
    for (n1, n2) in [
        (1.0_f64, 1.5_f64),
        (1.0, 3.5),
        (1.5, 1.0),
        (3.5, 1.0),
        (1.5, 2.05),
    ] {
        let theta_b = (n2 / n1).atan();
        let f = Fresnel::new(c(n1, 0.0), c(n2, 0.0), theta_b.cos());
        assert!(
            f.reflectance_p() < 1e-28,
            "{n1} → {n2}: R_p = {:e}",
            f.reflectance_p()
        );
        assert!(f.reflectance_s() > 1e-3);
        // One degree away R_p is clearly non-zero: the test can fail.
        let g = Fresnel::new(c(n1, 0.0), c(n2, 0.0), (theta_b + 1f64.to_radians()).cos());
        assert!(g.reflectance_p() > 1e-6);
    }
}

#[test]
fn total_reflection_beyond_critical_angle() {
    // Born & Wolf (1999) §1.5.4: sin θ_c = n2/n1; for θ > θ_c, |r_s| = |r_p| = 1, T = 0.
    for (n1, n2) in [(3.5_f64, 1.0_f64), (1.5, 1.0), (2.05, 1.5)] {
        let theta_c = (n2 / n1).asin().to_degrees();
        for above in [0.01, 1.0, 10.0, 30.0] {
            let angle = theta_c + above;
            if angle >= 90.0 {
                continue;
            }
            let f = Fresnel::new(c(n1, 0.0), c(n2, 0.0), cos_deg(angle));
            assert!(
                (f.reflectance_s() - 1.0).abs() < 1e-14,
                "{n1}→{n2} at {angle}°"
            );
            assert!(
                (f.reflectance_p() - 1.0).abs() < 1e-14,
                "{n1}→{n2} at {angle}°"
            );
            assert_eq!(f.transmittance_unpolarised(), 0.0);
            assert!(f.is_total_internal_reflection());
        }
        let below = Fresnel::new(c(n1, 0.0), c(n2, 0.0), cos_deg(theta_c - 1.0));
        assert!(below.reflectance_unpolarised() < 1.0 - 1e-3);
        assert!(!below.is_total_internal_reflection());
    }
}

#[test]
fn lossless_interfaces_conserve_energy_at_all_angles() {
    // Energy conservation R + T = 1 (Born & Wolf 1999 §1.5.3), s and p, both ways.
    for (n1, n2) in [
        (1.0, 1.5),
        (1.5, 1.0),
        (1.0, 3.57),
        (3.57, 1.0),
        (1.5, 2.05),
        (2.05, 3.9),
    ] {
        for i in 0..=180 {
            let angle = 0.5 * f64::from(i);
            let f = Fresnel::new(c(n1, 0.0), c(n2, 0.0), cos_deg(angle));
            let (s, p) = (
                f.reflectance_s() + f.transmittance_s(),
                f.reflectance_p() + f.transmittance_p(),
            );
            if angle < 90.0 {
                assert!((s - 1.0).abs() < 1e-13, "{n1}→{n2} {angle}°: R+T (s) = {s}");
                assert!((p - 1.0).abs() < 1e-13, "{n1}→{n2} {angle}°: R+T (p) = {p}");
            } else {
                // Exactly grazing: R = 1, nothing enters.
                assert!((f.reflectance_unpolarised() - 1.0).abs() < 1e-12);
            }
        }
    }
}

#[test]
fn agrees_with_tmm_package() {
    let text = include_str!("reference/fresnel_tmm.json");
    let doc: serde_json::Value = serde_json::from_str(text).unwrap();
    let cases = doc["cases"].as_array().unwrap();
    assert!(cases.len() >= 90);
    let z = |v: &serde_json::Value| c(v[0].as_f64().unwrap(), v[1].as_f64().unwrap());
    for case in cases {
        let label = format!("{} @ {}°", case["label"], case["angle_deg"]);
        let f = Fresnel::new(
            z(&case["n_i"]),
            z(&case["n_t"]),
            cos_deg(case["angle_deg"].as_f64().unwrap()),
        );
        for (ours, key) in [
            (f.r_s, "r_s"),
            (f.r_p, "r_p"),
            (f.t_s, "t_s"),
            (f.t_p, "t_p"),
        ] {
            let theirs = z(&case[key]);
            assert!(
                (ours - theirs).norm() < 1e-12,
                "{label} {key}: {ours} vs tmm {theirs}"
            );
        }
        for (ours, key) in [
            (f.reflectance_s(), "R_s"),
            (f.reflectance_p(), "R_p"),
            (f.transmittance_s(), "T_s"),
            (f.transmittance_p(), "T_p"),
        ] {
            let theirs = case[key].as_f64().unwrap();
            assert!(
                (ours - theirs).abs() < 1e-12,
                "{label} {key}: {ours} vs tmm {theirs}"
            );
        }
    }
}

#[test]
fn reflected_unpolarised_light_has_degree_of_polarisation_of_fresnel() {
    // Unpolarised input; reflection polarises it partially: DoP = (R_s − R_p)/(R_s + R_p)
    // (Born & Wolf 1999 §1.5.3, "degree of polarisation" of reflected natural light).
    // At Brewster's angle the reflected light is pure s (S1 = S0).
    for angle in [10.0, 30.0, 56.31, 70.0, 85.0] {
        let f = Fresnel::new(c(1.0, 0.0), c(1.5, 0.0), cos_deg(angle));
        let out = f.mueller_reflection() * Stokes::unpolarised(1.0);
        let (rs, rp) = (f.reflectance_s(), f.reflectance_p());
        let expected = (rs - rp) / (rs + rp);
        assert!(
            (out.degree_of_polarisation() - expected).abs() < 1e-12,
            "{angle}°"
        );
        assert!((out.intensity() - 0.5 * (rs + rp)).abs() < 1e-15);
    }
    let brewster = 1.5f64.atan();
    let f = Fresnel::new(c(1.0, 0.0), c(1.5, 0.0), brewster.cos());
    let out = f.mueller_reflection() * Stokes::unpolarised(1.0);
    assert!((out.degree_of_polarisation() - 1.0).abs() < 1e-12);
    assert!(out.0[1] > 0.0, "s-polarised: S1 = S0 > 0");
}

#[test]
fn mueller_reflection_plus_transmission_conserves_power_for_any_polarisation() {
    // Lossless interface: R_s + T_s = R_p + T_p = 1, so S0 is conserved for every input.
    let inputs = [
        Stokes::unpolarised(1.0),
        Stokes::s_polarised(1.0),
        Stokes::p_polarised(1.0),
        Stokes([1.0, 0.0, 1.0, 0.0]),
        Stokes([1.0, 0.0, 0.0, -1.0]),
        Stokes([1.0, 0.3, -0.4, 0.5]),
    ];
    for angle in [0.0, 20.0, 45.0, 60.0, 80.0] {
        let f = Fresnel::new(c(1.0, 0.0), c(3.57, 0.0), cos_deg(angle));
        for s in inputs {
            let total = (f.mueller_reflection() * s).intensity()
                + (f.mueller_transmission() * s).intensity();
            assert!((total - 1.0).abs() < 1e-13, "{angle}° {s:?}: {total}");
        }
    }
}

#[test]
fn rotated_horizontal_polariser_is_the_45_degree_polariser() {
    // Chipman, Lam & Young, *Polarized Light and Optical Systems* (2018), Mueller-calculus chapter: an ideal
    // linear polariser along x̂ is ½[[1,1,0,0],[1,1,0,0],[0;4],[0;4]]; turned by θ it is
    // R(−θ) M R(θ), which for θ = 45° is ½[[1,0,1,0],[0,0,0,0],[1,0,1,0],[0,0,0,0]].
    let polariser = Mueller::from_amplitudes(c(1.0, 0.0), c(0.0, 0.0), 1.0);
    let theta = 45f64.to_radians();
    let turned = Mueller::rotation(-theta) * polariser * Mueller::rotation(theta);
    let expected = [
        [0.5, 0.0, 0.5, 0.0],
        [0.0, 0.0, 0.0, 0.0],
        [0.5, 0.0, 0.5, 0.0],
        [0.0, 0.0, 0.0, 0.0],
    ];
    for (got_row, want_row) in turned.0.iter().zip(expected.iter()) {
        for (got, want) in got_row.iter().zip(want_row.iter()) {
            assert!((got - want).abs() < 1e-15, "{:?}", turned.0);
        }
    }
}

#[test]
fn quarter_wave_phase_turns_45_degree_light_circular() {
    // A retarder diag(1, i) (p delayed by a quarter wave) maps linear light at 45° to
    // circular light: |S3| = S0 (Chipman, Lam & Young 2018, quarter-wave retarder).
    let m = Mueller::from_amplitudes(c(1.0, 0.0), c(0.0, 1.0), 1.0);
    let out = m * Stokes([1.0, 0.0, 1.0, 0.0]);
    assert!(out.0[1].abs() < 1e-15 && out.0[2].abs() < 1e-15);
    assert!((out.0[3].abs() - 1.0).abs() < 1e-15, "{out:?}");
}

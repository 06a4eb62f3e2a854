//! Angle tables against the direct transfer-matrix solution (itself checked against
//! S. J. Byrnes' `tmm`, arXiv:1603.02720, in `reference_tmm.rs`): the interpolation error,
//! measured on dense independent angles, stays below the 1e-5 target on hard cases — bare
//! silicon, SiNx on silicon, silicon → air from inside with total internal reflection beyond
//! 16.6° (critical angle asin(1/3.5), Snell), a SiO2 / Ag rear reflector seen from the
//! silicon (a surface-plasmon resonance near 24°, Otto configuration: A. Otto, Z. Phys. 216,
//! 398 (1968)) and an absorbing ITO film. Indices are literal n + ik values.

use lightfold::thinfilm::{AngleTable, FilmStack, FullSample, Layer};
use num_complex::Complex64;

const TARGET: f64 = 1e-5;

fn c(re: f64, im: f64) -> Complex64 {
    Complex64::new(re, im)
}

fn air() -> Complex64 {
    c(1.0, 0.0)
}

fn si() -> Complex64 {
    c(3.94, 0.02)
}

/// (name, stack as met by the light, wavelength nm)
fn hard_cases() -> Vec<(&'static str, FilmStack, f64)> {
    let si_inside = c(3.5, 0.0);
    vec![
        (
            "bare Si from air",
            FilmStack::bare(air(), si()).unwrap(),
            600.0,
        ),
        (
            "SiNx 75 nm on Si",
            FilmStack::new(air(), vec![Layer::new(c(2.05, 0.001), 75.0)], si()).unwrap(),
            600.0,
        ),
        (
            "Si -> SiNx -> air from inside (TIR beyond 16.6 deg)",
            FilmStack::new(air(), vec![Layer::new(c(2.05, 0.0), 75.0)], si_inside)
                .unwrap()
                .reversed(),
            1000.0,
        ),
        (
            "bare Si -> air from inside",
            FilmStack::bare(si_inside, air()).unwrap(),
            1000.0,
        ),
        (
            "Si -> SiO2 100 nm -> Ag rear reflector",
            FilmStack::new(
                c(3.57, 0.0),
                vec![Layer::new(c(1.45, 0.0), 100.0)],
                c(0.04, 7.1),
            )
            .unwrap(),
            1000.0,
        ),
        (
            "Si -> SiO2 20 nm -> Ag (strong plasmon coupling)",
            FilmStack::new(
                c(3.57, 0.0),
                vec![Layer::new(c(1.45, 0.0), 20.0)],
                c(0.04, 7.1),
            )
            .unwrap(),
            1000.0,
        ),
        (
            "ITO 80 nm (absorbing) / SiNx on Si",
            FilmStack::new(
                air(),
                vec![
                    Layer::new(c(1.9, 0.025), 80.0),
                    Layer::new(c(2.05, 0.001), 40.0),
                ],
                si(),
            )
            .unwrap(),
            600.0,
        ),
        (
            "Si -> ITO -> air from inside (absorbing film under TIR)",
            FilmStack::new(c(3.5, 0.0), vec![Layer::new(c(1.9, 0.025), 90.0)], air()).unwrap(),
            1000.0,
        ),
    ]
}

#[test]
fn interpolation_error_is_measured_and_bounded_on_hard_cases() {
    for (name, stack, wavelength_nm) in hard_cases() {
        let table = AngleTable::build(&stack, wavelength_nm);
        let built = table.max_error();
        // Fresh angles, independent of the build's checks (uniform in cos θ and crowded
        // near the critical angle and grazing).
        let measured = table.measure_error(20_000, 0xC0FFEE);
        assert!(built <= TARGET, "{name}: build measured {built:e}");
        assert!(
            measured <= TARGET,
            "{name}: independent check {measured:e} (build {built:e})"
        );
        assert!(
            table.n_cells() < 20_000,
            "{name}: {} cells",
            table.n_cells()
        );
    }
}

#[test]
fn lookup_agrees_with_direct_solution_around_the_critical_angle() {
    // Si (3.5) → air: θ_c = asin(1/3.5) = 16.602°. Probe within ±0.01° of it.
    let stack = FilmStack::bare(c(3.5, 0.0), air()).unwrap();
    let table = AngleTable::build(&stack, 1000.0);
    let theta_c = (1.0f64 / 3.5).asin().to_degrees();
    for d in [-0.01, -1e-3, -1e-6, 0.0, 1e-6, 1e-3, 0.01] {
        let cos = (theta_c + d).to_radians().cos();
        let direct = stack.solve(1000.0, cos);
        let p = table.lookup(cos);
        assert!(
            (p.r_s - direct.s.reflectance).abs() < TARGET,
            "θ_c{d:+}: R_s"
        );
        assert!(
            (p.t_p - direct.p.transmittance).abs() < TARGET,
            "θ_c{d:+}: T_p"
        );
        if d > 0.0 {
            assert!(
                p.t_s.abs() < TARGET && p.t_p.abs() < TARGET,
                "no transmission beyond θ_c"
            );
        }
    }
}

#[test]
fn full_lookup_conserves_energy_and_gives_physical_mueller_matrices() {
    // All channels share the same nodes, so R + T + ΣA = 1 survives interpolation; the
    // Mueller matrices of a non-depolarising element satisfy |ρ|² ≤ R_s R_p (Cauchy–Schwarz;
    // equality for exact values), here to the interpolation error.
    for (name, stack, wavelength_nm) in hard_cases() {
        let table = AngleTable::build(&stack, wavelength_nm);
        let mut s = FullSample::new(table.n_layers());
        for i in 0..=1000 {
            let cos = i as f64 / 1000.0;
            table.lookup_full(cos, &mut s);
            let a_s: f64 = s.absorptance_s.iter().sum();
            let a_p: f64 = s.absorptance_p.iter().sum();
            let p = s.power;
            assert!(
                (p.r_s + p.t_s + a_s - 1.0).abs() < 1e-12,
                "{name} cos {cos}: s balance"
            );
            assert!(
                (p.r_p + p.t_p + a_p - 1.0).abs() < 1e-12,
                "{name} cos {cos}: p balance"
            );
            let rho2 = s.reflection_cross.norm_sqr();
            assert!(
                rho2 <= p.r_s * p.r_p + 4.0 * TARGET,
                "{name} cos {cos}: |ρ|² {rho2}"
            );
            let m = s.mueller_transmission();
            assert!(m[2][2].abs() <= m[0][0] + TARGET, "{name}: M33 beyond M11");
        }
    }
}

#[test]
fn tighter_tolerance_is_honoured() {
    let stack = FilmStack::new(air(), vec![Layer::new(c(2.05, 0.001), 75.0)], si()).unwrap();
    let table = AngleTable::with_tolerance(&stack, 600.0, 1e-8);
    assert!(table.max_error() <= 1e-8, "{:e}", table.max_error());
    assert!(table.measure_error(5000, 1) <= 1e-8);
}

#[test]
fn grazing_and_normal_incidence_match_their_limits() {
    for (name, stack, wavelength_nm) in hard_cases() {
        let table = AngleTable::build(&stack, wavelength_nm);
        let grazing = table.lookup(0.0);
        assert!(
            (grazing.r_s - 1.0).abs() < TARGET && (grazing.r_p - 1.0).abs() < TARGET,
            "{name}"
        );
        let normal = table.lookup(1.0);
        let direct = stack.solve(wavelength_nm, 1.0);
        assert!((normal.r_s - direct.s.reflectance).abs() < 1e-12, "{name}");
        // Out-of-range inputs are clamped, never NaN.
        assert!(table.lookup(1.5).r_s.is_finite() && table.lookup(-0.5).r_p.is_finite());
    }
}

//! Film stacks against the `tmm` package of S. J. Byrnes ("Multilayer optical calculations",
//! arXiv:1603.02720, 2016): complex r and t, R, T for s and p and the absorptance of every
//! layer (`tmm.absorp_in_each_layer`), for bare interfaces, single and multi-layer coatings,
//! an absorbing TCO, incidence from silicon below and beyond the critical angle, frustrated
//! total internal reflection and a Si / SiO2 / Ag rear reflector. The values come from
//! `tests/reference/gen_tmm.py` (committed with its output `tests/reference/tmm_cases.json`);
//! all indices are literal n + ik values.

use lightfold::thinfilm::{Amplitudes, FilmStack, Layer};
use num_complex::Complex64;
use serde_json::Value;

/// Agreement demanded with the reference (absolute, on quantities of order one).
const TOL: f64 = 1e-9;

fn index(v: &Value) -> Complex64 {
    Complex64::new(v[0].as_f64().unwrap(), v[1].as_f64().unwrap())
}

fn load() -> Vec<Value> {
    let text = include_str!("reference/tmm_cases.json");
    let doc: Value = serde_json::from_str(text).expect("tmm_cases.json parses");
    doc["cases"].as_array().expect("cases array").clone()
}

fn stack_of(case: &Value) -> FilmStack {
    let layers = case["layers"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| Layer::new(index(l), l[2].as_f64().unwrap()))
        .collect();
    FilmStack::new(index(&case["above"]), layers, index(&case["below"])).unwrap()
}

fn compare(name: &str, pol: &str, ours: &Amplitudes, reference: &Value) -> Vec<String> {
    let mut problems = Vec::new();
    let mut check = |what: &str, got: f64, want: f64| {
        if (got - want).abs() > TOL * want.abs().max(1.0) || got.is_nan() {
            problems.push(format!(
                "{name} [{pol}] {what}: got {got:.15e}, tmm {want:.15e}"
            ));
        }
    };
    let r = index(&reference["r"]);
    let t = index(&reference["t"]);
    check("Re r", ours.r.re, r.re);
    check("Im r", ours.r.im, r.im);
    check("Re t", ours.t.re, t.re);
    check("Im t", ours.t.im, t.im);
    check("R", ours.reflectance, reference["R"].as_f64().unwrap());
    check("T", ours.transmittance, reference["T"].as_f64().unwrap());
    let a_ref = reference["A"].as_array().unwrap();
    assert_eq!(a_ref.len(), ours.absorptance.len(), "{name}: layer count");
    for (l, (got, want)) in ours.absorptance.iter().zip(a_ref).enumerate() {
        check(&format!("A[layer {}]", l + 1), *got, want.as_f64().unwrap());
    }
    problems
}

#[test]
fn reference_file_covers_the_required_cases() {
    let cases = load();
    assert!(cases.len() >= 30, "only {} cases", cases.len());
    let names: Vec<&str> = cases.iter().map(|c| c["name"].as_str().unwrap()).collect();
    for needle in [
        "ITO",
        "from inside",
        "Ag rear",
        "frustrated TIR",
        "five-layer",
    ] {
        assert!(
            names.iter().any(|n| n.contains(needle)),
            "no case with {needle}"
        );
    }
}

#[test]
fn amplitudes_powers_and_layer_absorptance_match_tmm() {
    let mut problems = Vec::new();
    for case in load() {
        let name = case["name"].as_str().unwrap();
        let stack = stack_of(&case);
        let wavelength_nm = case["wavelength_nm"].as_f64().unwrap();
        let cos = case["angle_deg"].as_f64().unwrap().to_radians().cos();
        let response = stack.solve(wavelength_nm, cos);
        problems.extend(compare(name, "s", &response.s, &case["s"]));
        problems.extend(compare(name, "p", &response.p, &case["p"]));
    }
    assert!(
        problems.is_empty(),
        "{} mismatches:\n{}",
        problems.len(),
        problems.join("\n")
    );
}

#[test]
fn beyond_the_critical_angle_tmm_and_we_agree_on_total_reflection() {
    // Si (n = 3.5) → SiNx → air at 30° and 60°: the exit medium is evanescent, T = 0 and,
    // the SiNx being nearly lossless, R is within its tiny absorption of 1 (tmm values).
    let mut seen = 0;
    for case in load() {
        let name = case["name"].as_str().unwrap();
        if !name.starts_with("Si -> SiNx") || case["angle_deg"].as_f64().unwrap() < 17.0 {
            continue;
        }
        seen += 1;
        let stack = stack_of(&case);
        let cos = case["angle_deg"].as_f64().unwrap().to_radians().cos();
        let f = stack.solve(case["wavelength_nm"].as_f64().unwrap(), cos);
        assert_eq!(f.s.transmittance, 0.0, "{name}");
        assert!(
            (f.s.reflectance - case["s"]["R"].as_f64().unwrap()).abs() < TOL,
            "{name}"
        );
        assert!(f.s.reflectance > 0.99, "{name}");
    }
    assert!(seen >= 3);
}

// ---------------------------------------------------------------------------------------
// Identities that any correct solution must satisfy, each with its textbook source.

fn c(re: f64, im: f64) -> Complex64 {
    Complex64::new(re, im)
}

/// SplitMix64 (Steele, Lea & Flood, OOPSLA 2014) for reproducible random stacks.
struct Rng(u64);
impl Rng {
    fn unit(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }
    fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.unit()
    }
}

/// A random stack of 0–6 films; `lossless` forces k = 0 everywhere.
fn random_stack(rng: &mut Rng, lossless: bool) -> FilmStack {
    let k = |rng: &mut Rng, max: f64| {
        if lossless || rng.unit() < 0.4 {
            0.0
        } else {
            rng.range(0.0, max)
        }
    };
    let n_layers = (rng.unit() * 7.0) as usize;
    let layers = (0..n_layers)
        .map(|_| {
            let n = rng.range(1.0, 4.5);
            let kk = k(rng, 0.6);
            Layer::new(c(n, kk), rng.range(0.5, 600.0))
        })
        .collect();
    let above = c(rng.range(1.0, 4.0), 0.0);
    let below = if !lossless && rng.unit() < 0.2 {
        c(rng.range(0.03, 1.5), rng.range(2.0, 10.0)) // a metal
    } else {
        let n = rng.range(1.0, 4.0);
        c(n, k(rng, 0.1))
    };
    FilmStack::new(above, layers, below).unwrap()
}

#[test]
fn quarter_wave_layer_cancels_reflection() {
    // Macleod (2010) §4.2: a quarter-wave layer of index √(n₀ n_s) cancels the normal-
    // incidence reflection. n₀ = 1, n_s = 4 → n_c = 2, thickness λ/(4 n_c) = 75 nm at 600 nm.
    let stack = FilmStack::new(
        c(1.0, 0.0),
        vec![Layer::new(c(2.0, 0.0), 75.0)],
        c(4.0, 0.0),
    );
    let f = stack.unwrap().solve(600.0, 1.0);
    assert!(
        f.s.reflectance < 1e-12 && f.p.reflectance < 1e-12,
        "R = {:e}",
        f.s.reflectance
    );
}

#[test]
fn half_wave_layer_is_absent() {
    // Macleod (2010) §2.2: a half-wave layer (n d = λ/2) at normal incidence leaves the
    // reflection of the bare substrate unchanged ("absentee layer").
    let bare = FilmStack::bare(c(1.0, 0.0), c(3.9, 0.02))
        .unwrap()
        .solve(600.0, 1.0);
    let coated = FilmStack::new(
        c(1.0, 0.0),
        vec![Layer::new(c(1.5, 0.0), 200.0)],
        c(3.9, 0.02),
    )
    .unwrap();
    let f = coated.solve(600.0, 1.0);
    assert!(
        (f.s.r - bare.s.r).norm() < 1e-13,
        "{} vs {}",
        f.s.r,
        bare.s.r
    );
}

#[test]
fn energy_balances_for_random_stacks_at_any_angle_from_either_side() {
    // Poynting's theorem: R + T + ΣA = 1 (Byrnes 2016 §4), including total internal
    // reflection, evanescent layers and metal exits.
    let mut rng = Rng(2024);
    let mut worst: f64 = 0.0;
    for _ in 0..400 {
        let stack = random_stack(&mut rng, false);
        for side in [stack.clone(), stack.reversed()] {
            // A metal seen from inside is taken by its real part; skip non-physical n.
            if side.above().re < 1.0 {
                continue;
            }
            for _ in 0..8 {
                let cos = rng.unit();
                let f = side.solve(rng.range(300.0, 1200.0), cos);
                for a in [&f.s, &f.p] {
                    let sum = a.reflectance + a.transmittance + a.absorptance.iter().sum::<f64>();
                    assert!(sum.is_finite(), "{side:?} cos {cos}");
                    worst = worst.max((sum - 1.0).abs());
                    assert!(a.reflectance >= -1e-15 && a.transmittance >= -1e-15);
                    assert!(a.reflectance <= 1.0 + 1e-12, "R = {}", a.reflectance);
                }
            }
        }
    }
    assert!(worst < 1e-12, "worst |R + T + ΣA − 1| = {worst:e}");
}

#[test]
fn lossless_stacks_absorb_nothing() {
    let mut rng = Rng(7);
    for _ in 0..300 {
        let stack = random_stack(&mut rng, true);
        let f = stack.solve(rng.range(300.0, 1200.0), rng.unit());
        for a in f.s.absorptance.iter().chain(&f.p.absorptance) {
            assert!(
                a.abs() < 1e-13,
                "A = {a:e} in a lossless layer of {stack:?}"
            );
        }
    }
}

/// Cosine in the exit medium (real index) for incidence cosine `cos0` from above.
fn exit_cos(stack: &FilmStack, cos0: f64) -> Option<f64> {
    let (n0, nf) = (stack.above().re, stack.below().re);
    let sin_f = n0 * (1.0 - cos0 * cos0).sqrt() / nf;
    (sin_f < 1.0).then(|| (1.0 - sin_f * sin_f).sqrt())
}

#[test]
fn transmittance_is_reciprocal_and_lossless_stacks_obey_stokes_relations() {
    // Lorentz reciprocity: T is the same from either side at Snell-conjugate angles, even
    // with absorbing films; lossless stacks have R = R' and, with flux-normalised
    // τ = t √f, the Stokes relation r' = −conj(r) τ / conj(τ) (unitary, symmetric
    // scattering matrix; Born & Wolf 1999 §1.6.4 for a film, G. G. Stokes 1849).
    let mut rng = Rng(99);
    let mut checked = 0;
    for trial in 0..300 {
        let lossless = trial % 2 == 0;
        let mut stack = random_stack(&mut rng, lossless);
        if stack.below().im > 0.0 {
            let (above, below) = (stack.above(), c(stack.below().re.max(1.0), 0.0));
            stack = FilmStack::new(above, stack.layers().to_vec(), below).unwrap();
        }
        let cos0 = rng.range(0.05, 1.0);
        let Some(cos_f) = exit_cos(&stack, cos0) else {
            continue;
        };
        let wl = rng.range(300.0, 1200.0);
        let (f, b) = (stack.solve(wl, cos0), stack.reversed().solve(wl, cos_f));
        for (x, y) in [(&f.s, &b.s), (&f.p, &b.p)] {
            assert!(
                (x.transmittance - y.transmittance).abs() < 1e-12,
                "T {} vs {}",
                x.transmittance,
                y.transmittance
            );
            if lossless {
                assert!((x.reflectance - y.reflectance).abs() < 1e-12);
                let tau = x.t * x.power_factor.sqrt();
                let rhs = -x.r.conj() * tau / tau.conj();
                assert!(
                    (y.r - rhs).norm() < 1e-10 || x.transmittance < 1e-14,
                    "{} vs {}",
                    y.r,
                    rhs
                );
            }
        }
        checked += 1;
    }
    assert!(
        checked > 100,
        "only {checked} stacks had a propagating exit"
    );
}

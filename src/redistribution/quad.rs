//! Gauss–Legendre quadrature on an interval, with an optional square-root substitution at an
//! end point where the integrand behaves like g(√(end − s)) with g smooth (Fresnel responses
//! at grazing incidence and at the critical angle do).
//!
//! Nodes and weights: 10-point rule, M. Abramowitz & I. A. Stegun, *Handbook of Mathematical
//! Functions*, NBS (1964), Table 25.4. Exact for polynomials of degree ≤ 19.

// Digits as printed in A&S Table 25.4; f64 keeps the first 17.
#[allow(clippy::excessive_precision)]
/// Positive nodes of the 10-point Gauss–Legendre rule on [−1, 1] (A&S Table 25.4).
const GL10_X: [f64; 5] = [
    0.148_874_338_981_631_210_884_826_001_130,
    0.433_395_394_129_247_190_799_265_943_166,
    0.679_409_568_299_024_406_234_327_365_115,
    0.865_063_366_688_984_510_732_096_688_423,
    0.973_906_528_517_171_720_077_964_012_084,
];
#[allow(clippy::excessive_precision)]
/// Matching weights.
const GL10_W: [f64; 5] = [
    0.295_524_224_714_752_870_173_892_994_651,
    0.269_266_719_309_996_355_091_226_921_569,
    0.219_086_362_515_982_043_995_534_934_228,
    0.149_451_349_150_580_593_145_776_339_658,
    0.066_671_344_308_688_137_593_568_809_893,
];

/// The 20 (node, weight) pairs of the 10-point rule mapped to [a, b], in increasing order.
pub fn gauss_legendre_10(a: f64, b: f64) -> [(f64, f64); 10] {
    let (c, h) = (0.5 * (a + b), 0.5 * (b - a));
    let mut out = [(0.0, 0.0); 10];
    for k in 0..5 {
        out[4 - k] = (c - h * GL10_X[k], h * GL10_W[k]);
        out[5 + k] = (c + h * GL10_X[k], h * GL10_W[k]);
    }
    out
}

/// Where an integrand has a square-root end-point behaviour.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Singular {
    None,
    Low,
    High,
}

/// Nodes and weights for ∫_lo^hi f(s) ds. With `Singular::High` the substitution
/// s = hi − u² (ds = 2u du) turns f = g(√(hi − s)) into a smooth integrand in u; `Low`
/// likewise with s = lo + u². Returns 10 (s, w) pairs.
pub fn nodes(lo: f64, hi: f64, singular: Singular) -> [(f64, f64); 10] {
    match singular {
        Singular::None => gauss_legendre_10(lo, hi),
        Singular::High | Singular::Low => {
            let umax = (hi - lo).max(0.0).sqrt();
            let mut out = gauss_legendre_10(0.0, umax);
            for (s, w) in out.iter_mut() {
                let u = *s;
                *w *= 2.0 * u;
                *s = if singular == Singular::High {
                    hi - u * u
                } else {
                    lo + u * u
                };
            }
            out
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rule_is_exact_for_degree_19() {
        let q: f64 = gauss_legendre_10(0.0, 2.0)
            .iter()
            .map(|(x, w)| w * x.powi(19))
            .sum();
        let exact = 2f64.powi(20) / 20.0;
        assert!((q / exact - 1.0).abs() < 1e-14, "{q} vs {exact}");
    }

    #[test]
    fn substitution_integrates_square_root_end_points() {
        // ∫_0^1 √(1 − s) ds = 2/3 and ∫_0^1 √s ds = 2/3, exactly after the substitution.
        let hi: f64 = nodes(0.0, 1.0, Singular::High)
            .iter()
            .map(|(s, w)| w * (1.0 - s).sqrt())
            .sum();
        let lo: f64 = nodes(0.0, 1.0, Singular::Low)
            .iter()
            .map(|(s, w)| w * s.sqrt())
            .sum();
        assert!((hi - 2.0 / 3.0).abs() < 1e-15 && (lo - 2.0 / 3.0).abs() < 1e-15);
    }
}

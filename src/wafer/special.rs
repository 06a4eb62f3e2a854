//! Exponential integrals E_n(x) and the bin averages of Beer–Lambert attenuation built on them.
//!
//! E_n(x) = ∫₁^∞ e^{−xt} t^{−n} dt (M. Abramowitz & I. A. Stegun, *Handbook of Mathematical
//! Functions*, NBS (1964), 5.1.4). Evaluation: for x ≤ 1 the power series A&S 5.1.12; for
//! x > 1 the continued fraction A&S 5.1.22, summed by the modified Lentz method
//! (W. J. Lentz, Appl. Opt. 15, 668 (1976); I. J. Thompson & A. R. Barnett, J. Comput. Phys.
//! 64, 490 (1986)). Both stop at a relative term size of 1e-16; the observed relative error
//! against `scipy.special.expn` is below 1e-14 over n = 1…5, x = 1e-10…700
//! (tests/reference_limits.rs). The polynomial fits A&S 5.1.53/5.1.56 (|ε| ≤ 2e-7, 5e-5) are
//! not accurate enough for the 1e-12 energy budget and are not used.

use crate::redistribution::quad::gauss_legendre_10;

/// Euler–Mascheroni constant γ (A&S 6.1.3).
const EULER_GAMMA: f64 = 0.577_215_664_901_532_860_606_512_090_082;

/// E_n(x) for n ≥ 1 and x ≥ 0. E_1(0) = +∞; E_n(0) = 1/(n − 1) for n ≥ 2; NaN for x < 0 or
/// NaN x. Underflows to 0 for x ≳ 745.
pub fn expint_en(n: u32, x: f64) -> f64 {
    if x.is_nan() || x < 0.0 || n == 0 {
        return f64::NAN;
    }
    let nm1 = (n - 1) as i64;
    if x == 0.0 {
        return if n == 1 {
            f64::INFINITY
        } else {
            1.0 / nm1 as f64
        };
    }
    if x.is_infinite() {
        return 0.0;
    }
    if x > 1.0 {
        // Continued fraction A&S 5.1.22 (even form), modified Lentz.
        let tiny = 1e-300;
        let mut b = x + n as f64;
        let mut c = 1.0 / tiny;
        let mut d = 1.0 / b;
        let mut h = d;
        for i in 1..10_000i64 {
            let an = -(i * (nm1 + i)) as f64;
            b += 2.0;
            d = an * d + b;
            if d.abs() < tiny {
                d = tiny;
            }
            c = b + an / c;
            if c.abs() < tiny {
                c = tiny;
            }
            d = 1.0 / d;
            let del = c * d;
            h *= del;
            if (del - 1.0).abs() < 1e-16 {
                break;
            }
        }
        h * (-x).exp()
    } else {
        // Power series A&S 5.1.12.
        let mut ans = if nm1 != 0 {
            1.0 / nm1 as f64
        } else {
            -x.ln() - EULER_GAMMA
        };
        let mut fact = 1.0;
        for i in 1..10_000i64 {
            fact *= -x / i as f64;
            let del = if i != nm1 {
                -fact / (i - nm1) as f64
            } else {
                let psi = -EULER_GAMMA + (1..=nm1).map(|k| 1.0 / k as f64).sum::<f64>();
                fact * (-x.ln() + psi)
            };
            ans += del;
            if del.abs() < ans.abs() * 1e-17 {
                break;
            }
        }
        ans
    }
}

/// Bins narrower than this in sin²θ use quadrature instead of the closed forms, whose
/// difference of two E_n terms would cancel (relative error ≈ 1e-16 / Δs).
const CLOSED_FORM_MIN_WIDTH: f64 = 1e-3;

/// Mean over a polar bin μ = cos θ ∈ [μ_lo, μ_hi], weighted uniformly in sin²θ (weight
/// 2μ dμ / (μ_hi² − μ_lo²), the power distribution of a uniform radiance), of e^{−τ/μ}:
/// the bin's transmission through a slab of optical thickness τ = α d.
///
/// Closed form (substitute t = 1/μ in A&S 5.1.4):
/// `⟨e^{−τ/μ}⟩ = 2 [μ_hi² E₃(τ/μ_hi) − μ_lo² E₃(τ/μ_lo)] / (μ_hi² − μ_lo²)`;
/// over the whole hemisphere this is 2E₃(τ). Narrow bins use composite Gauss–Legendre.
pub fn bin_transmission(tau: f64, mu_lo: f64, mu_hi: f64) -> f64 {
    bin_average(tau, mu_lo, mu_hi, Kernel::Transmission)
}

/// Mean of e^{−τ/μ}/μ over the bin (same weighting): the absorption rate per unit optical
/// depth at depth τ of light that entered the slab with unit power in this bin, so that
/// −d/dτ ⟨e^{−τ/μ}⟩ = ⟨e^{−τ/μ}/μ⟩. Closed form
/// `2 [μ_hi E₂(τ/μ_hi) − μ_lo E₂(τ/μ_lo)] / (μ_hi² − μ_lo²)`.
pub fn bin_rate(tau: f64, mu_lo: f64, mu_hi: f64) -> f64 {
    bin_average(tau, mu_lo, mu_hi, Kernel::Rate)
}

#[derive(Clone, Copy, PartialEq)]
enum Kernel {
    Transmission,
    Rate,
}

fn bin_average(tau: f64, mu_lo: f64, mu_hi: f64, kernel: Kernel) -> f64 {
    debug_assert!(tau >= 0.0 && (0.0..=1.0).contains(&mu_lo) && mu_lo < mu_hi && mu_hi <= 1.0);
    let ds = mu_hi * mu_hi - mu_lo * mu_lo;
    if tau == 0.0 {
        return match kernel {
            Kernel::Transmission => 1.0,
            Kernel::Rate => 2.0 / (mu_hi + mu_lo),
        };
    }
    if tau / mu_hi > 745.0 {
        return 0.0;
    }
    if ds >= CLOSED_FORM_MIN_WIDTH {
        // μ_lo = 0 contributes 0 · E_n(∞) = 0.
        let term = |mu: f64| -> f64 {
            if mu == 0.0 {
                return 0.0;
            }
            match kernel {
                Kernel::Transmission => mu * mu * expint_en(3, tau / mu),
                Kernel::Rate => mu * expint_en(2, tau / mu),
            }
        };
        return 2.0 * (term(mu_hi) - term(mu_lo)) / ds;
    }
    // Composite 10-point Gauss–Legendre in μ; panels keep the exponent's change per panel
    // ≤ 2 (up to 256 panels; beyond, the low-μ end is below e^{−500} of the high end).
    let spread = if mu_lo > 0.0 {
        tau * (1.0 / mu_lo - 1.0 / mu_hi)
    } else {
        f64::INFINITY
    };
    let panels = (spread / 2.0).ceil().clamp(1.0, 256.0) as usize;
    // Normalise with (μ_hi − μ_lo)(μ_hi + μ_lo), the exact integral of the weight 2μ over
    // the same end points as the nodes: μ_hi² − μ_lo² would lose ~1e-16/Δs relative.
    let ds = (mu_hi - mu_lo) * (mu_hi + mu_lo);
    let h = (mu_hi - mu_lo) / panels as f64;
    let mut sum = 0.0;
    for k in 0..panels {
        let a = mu_lo + h * k as f64;
        for (mu, w) in gauss_legendre_10(a, a + h) {
            let e = (-tau / mu).exp();
            sum += w * match kernel {
                Kernel::Transmission => 2.0 * mu * e,
                Kernel::Rate => 2.0 * e,
            };
        }
    }
    sum / ds
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn recurrence_and_special_values() {
        // A&S 5.1.14: n E_{n+1}(x) = e^{−x} − x E_n(x); E_n(0) = 1/(n − 1).
        for x in [1e-6, 0.3, 1.0, 1.0 + 1e-12, 2.5, 40.0] {
            for n in 1..5u32 {
                let lhs = n as f64 * expint_en(n + 1, x);
                let rhs = (-x).exp() - x * expint_en(n, x);
                assert!(
                    (lhs - rhs).abs() <= 1e-14 * lhs.abs().max(1e-300),
                    "n={n} x={x}"
                );
            }
        }
        assert_eq!(expint_en(3, 0.0), 0.5);
        assert!(expint_en(1, 0.0).is_infinite());
        assert!(expint_en(2, -1.0).is_nan());
    }

    #[test]
    fn closed_form_matches_quadrature_across_the_switch() {
        for tau in [1e-6, 0.01, 0.5, 3.0] {
            for (lo, hi) in [(0.0, 1.0), (0.3, 0.7), (0.2, 0.2025), (0.9, 0.9005)] {
                let closed = {
                    let ds = hi * hi - lo * lo;
                    let t = |m: f64| {
                        if m == 0.0 {
                            0.0
                        } else {
                            m * m * expint_en(3, tau / m)
                        }
                    };
                    2.0 * (t(hi) - t(lo)) / ds
                };
                let quad = {
                    // fine midpoint rule in μ with weight 2μ/Δs
                    let k = 200_000;
                    let ds = hi * hi - lo * lo;
                    (0..k)
                        .map(|i| {
                            let m = lo + (hi - lo) * (i as f64 + 0.5) / k as f64;
                            2.0 * m * (-tau / m).exp() * (hi - lo) / k as f64
                        })
                        .sum::<f64>()
                        / ds
                };
                let tol = if hi * hi - lo * lo >= CLOSED_FORM_MIN_WIDTH {
                    1e-9
                } else {
                    1e-6
                };
                assert!(
                    (closed - quad).abs() < tol,
                    "τ={tau} [{lo},{hi}]: {closed} vs {quad}"
                );
                let b = bin_transmission(tau, lo, hi);
                assert!(
                    (b - quad).abs() < 1e-9,
                    "τ={tau} [{lo},{hi}]: {b} vs {quad}"
                );
            }
        }
    }

    #[test]
    fn rate_is_minus_the_derivative_of_transmission() {
        for (lo, hi) in [(0.0, 1.0), (0.5, 0.6), (0.99999, 1.0)] {
            let tau = 0.7;
            let h = 1e-5;
            let d =
                (bin_transmission(tau - h, lo, hi) - bin_transmission(tau + h, lo, hi)) / (2.0 * h);
            let r = bin_rate(tau, lo, hi);
            assert!((d - r).abs() < 1e-8 * r, "[{lo},{hi}] {d} vs {r}");
        }
    }
}

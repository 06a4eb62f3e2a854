//! Dispersion models: N(λ) = n + ik from a table or a formula, each with an explicit
//! validity range in vacuum wavelength (nm). Range checks live in [`super::Material`]; the
//! functions here assume the wavelength is inside the model's range.
//!
//! Formula models written in photon energy use E = hc/λ with hc = 1239.841984 eV·nm
//! (CODATA 2018, exact h, c and e). Formula models written in wavelength use λ in µm, as in
//! the refractiveindex.info formula conventions (M. N. Polyanskiy, "Refractiveindex.info
//! database of optical constants", Sci. Data 11, 94 (2024)).

use super::MaterialError;
use crate::optics::Index;
use num_complex::Complex64;
use std::f64::consts::PI;

/// hc in eV·nm (CODATA 2018): photon energy E in eV = `HC_EV_NM` / (λ in nm).
pub const HC_EV_NM: f64 = 1239.841984;

/// One dispersion model with its validity range.
#[derive(Clone, Debug)]
pub enum Dispersion {
    /// The same index at every wavelength; range (0, ∞).
    Constant(Index),
    /// Tabulated n and k, linearly interpolated.
    Tabulated(Table),
    /// Cauchy polynomial in λ (k = 0).
    Cauchy(Cauchy),
    /// Sellmeier formula (k = 0).
    Sellmeier(Sellmeier),
    /// Tauc–Lorentz amorphous-semiconductor model (Jellison & Modine 1996).
    TaucLorentz(TaucLorentz),
    /// Drude free-carrier term plus Lorentz oscillators.
    DrudeLorentz(DrudeLorentz),
}

impl Dispersion {
    /// Validity range (min, max) in nm, inclusive.
    pub fn range_nm(&self) -> (f64, f64) {
        match self {
            Dispersion::Constant(_) => (0.0, f64::INFINITY),
            Dispersion::Tabulated(t) => t.range_nm(),
            Dispersion::Cauchy(m) => m.range_nm,
            Dispersion::Sellmeier(m) => m.range_nm,
            Dispersion::TaucLorentz(m) => m.range_nm,
            Dispersion::DrudeLorentz(m) => m.range_nm,
        }
    }

    /// N at `wavelength_nm`, which the caller has checked lies inside [`Self::range_nm`].
    pub fn index_in_range(&self, wavelength_nm: f64) -> Index {
        match self {
            Dispersion::Constant(n) => *n,
            Dispersion::Tabulated(t) => t.interpolate(wavelength_nm),
            Dispersion::Cauchy(m) => Complex64::new(m.n(wavelength_nm), 0.0),
            Dispersion::Sellmeier(m) => Complex64::new(m.n(wavelength_nm), 0.0),
            Dispersion::TaucLorentz(m) => m.index(wavelength_nm),
            Dispersion::DrudeLorentz(m) => m.index(wavelength_nm),
        }
    }

    /// Whether k > 0 somewhere in the validity range.
    pub fn is_absorbing_anywhere(&self) -> bool {
        match self {
            Dispersion::Constant(n) => n.im > 0.0,
            Dispersion::Tabulated(t) => t.k.iter().any(|&k| k > 0.0),
            Dispersion::Cauchy(_) | Dispersion::Sellmeier(_) => false,
            // ε2 > 0 for every photon energy above Eg, i.e. wavelengths below hc/Eg.
            Dispersion::TaucLorentz(m) => m.range_nm.0 < HC_EV_NM / m.eg_ev,
            Dispersion::DrudeLorentz(m) => {
                m.drude
                    .is_some_and(|d| d.gamma_ev > 0.0 && d.plasma_ev > 0.0)
                    || m.oscillators
                        .iter()
                        .any(|o| o.gamma_ev > 0.0 && o.strength > 0.0)
            }
        }
    }

    /// Short name of the model kind: "constant", "tabulated", "cauchy", "sellmeier",
    /// "tauc-lorentz", "drude-lorentz".
    pub fn kind(&self) -> &'static str {
        match self {
            Dispersion::Constant(_) => "constant",
            Dispersion::Tabulated(_) => "tabulated",
            Dispersion::Cauchy(_) => "cauchy",
            Dispersion::Sellmeier(_) => "sellmeier",
            Dispersion::TaucLorentz(_) => "tauc-lorentz",
            Dispersion::DrudeLorentz(_) => "drude-lorentz",
        }
    }
}

fn invalid(model: &'static str, problem: impl Into<String>) -> MaterialError {
    MaterialError::InvalidModel {
        model,
        problem: problem.into(),
    }
}

fn check_range(model: &'static str, range_nm: (f64, f64)) -> Result<(), MaterialError> {
    let (lo, hi) = range_nm;
    if !(lo.is_finite() && hi.is_finite() && lo > 0.0 && hi > lo) {
        return Err(invalid(
            model,
            format!("validity range {lo}–{hi} nm must satisfy 0 < min < max < ∞"),
        ));
    }
    Ok(())
}

// ---------------------------------------------------------------------------------------------
// Tabulated data
// ---------------------------------------------------------------------------------------------

/// Tabulated n(λ), k(λ) with strictly increasing wavelengths.
///
/// Between points n and k are interpolated linearly and independently: the convention of
/// the refractiveindex.info database, from which the built-in tables come (data/nk/SOURCES.md).
/// Range: first to last wavelength, inclusive; never extrapolated.
#[derive(Clone)]
pub struct Table {
    wavelength_nm: Vec<f64>,
    n: Vec<f64>,
    k: Vec<f64>,
}

impl std::fmt::Debug for Table {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let (lo, hi) = self.range_nm();
        write!(
            f,
            "Table({} points, {lo}–{hi} nm)",
            self.wavelength_nm.len()
        )
    }
}

impl Table {
    /// Table from (wavelength_nm, n, k) rows: at least two, wavelengths finite, positive and
    /// strictly increasing, n > 0, k ≥ 0.
    pub fn new(rows: &[(f64, f64, f64)]) -> Result<Table, MaterialError> {
        if rows.len() < 2 {
            return Err(invalid("tabulated", "needs at least two rows"));
        }
        for (i, &(wl, n, k)) in rows.iter().enumerate() {
            if !(wl.is_finite()
                && wl > 0.0
                && n.is_finite()
                && n > 0.0
                && k.is_finite()
                && k >= 0.0)
            {
                return Err(invalid(
                    "tabulated",
                    format!("row {i}: ({wl}, {n}, {k}) needs wavelength > 0, n > 0, k ≥ 0"),
                ));
            }
            if i > 0 && wl <= rows[i - 1].0 {
                return Err(invalid(
                    "tabulated",
                    format!("row {i}: wavelength {wl} nm does not increase"),
                ));
            }
        }
        Ok(Table {
            wavelength_nm: rows.iter().map(|r| r.0).collect(),
            n: rows.iter().map(|r| r.1).collect(),
            k: rows.iter().map(|r| r.2).collect(),
        })
    }

    /// First and last wavelength in nm.
    pub fn range_nm(&self) -> (f64, f64) {
        (
            self.wavelength_nm[0],
            *self.wavelength_nm.last().expect("≥ 2 rows"),
        )
    }

    /// The rows (wavelength_nm, n, k).
    pub fn rows(&self) -> impl Iterator<Item = (f64, f64, f64)> + '_ {
        (0..self.wavelength_nm.len()).map(|i| (self.wavelength_nm[i], self.n[i], self.k[i]))
    }

    /// Linear interpolation; the wavelength is clamped to the range (callers check it).
    fn interpolate(&self, wavelength_nm: f64) -> Index {
        let w = &self.wavelength_nm;
        let last = w.len() - 1;
        // Index of the first point strictly above λ, kept within 1..=last.
        let hi = w.partition_point(|&x| x <= wavelength_nm).clamp(1, last);
        let lo = hi - 1;
        let t = ((wavelength_nm - w[lo]) / (w[hi] - w[lo])).clamp(0.0, 1.0);
        let n = self.n[lo] + t * (self.n[hi] - self.n[lo]);
        let k = self.k[lo] + t * (self.k[hi] - self.k[lo]);
        Complex64::new(n, k.max(0.0))
    }
}

// ---------------------------------------------------------------------------------------------
// Cauchy and Sellmeier (transparent)
// ---------------------------------------------------------------------------------------------

/// Cauchy-type power series n(λ) = a + Σ c_j λ^{e_j}, λ in µm, k = 0.
///
/// The classic form n = A + B/λ² + C/λ⁴ is `terms = [(B, −2), (C, −4)]`. Source:
/// A.-L. Cauchy, *Mémoire sur la dispersion de la lumière* (1836); general exponents as in
/// refractiveindex.info formula 5 (Polyanskiy 2024).
#[derive(Clone, Debug)]
pub struct Cauchy {
    /// Constant term a.
    pub constant: f64,
    /// Pairs (c_j, e_j).
    pub terms: Vec<(f64, f64)>,
    /// Validity range in nm.
    pub range_nm: (f64, f64),
}

impl Cauchy {
    /// Checked constructor: finite coefficients, valid range, n > 0 over the range.
    pub fn new(
        constant: f64,
        terms: Vec<(f64, f64)>,
        range_nm: (f64, f64),
    ) -> Result<Cauchy, MaterialError> {
        check_range("cauchy", range_nm)?;
        if !constant.is_finite() || terms.iter().any(|(c, e)| !c.is_finite() || !e.is_finite()) {
            return Err(invalid("cauchy", "coefficients must be finite numbers"));
        }
        let m = Cauchy {
            constant,
            terms,
            range_nm,
        };
        if let Some(wl) = sample_range(range_nm).find(|&wl| m.n(wl).is_nan() || m.n(wl) <= 0.0) {
            return Err(invalid(
                "cauchy",
                format!("n ≤ 0 at {wl:.1} nm inside the range"),
            ));
        }
        Ok(m)
    }

    /// n at `wavelength_nm`.
    pub fn n(&self, wavelength_nm: f64) -> f64 {
        let l_um = wavelength_nm * 1e-3;
        self.constant
            + self
                .terms
                .iter()
                .map(|&(c, e)| c * l_um.powf(e))
                .sum::<f64>()
    }
}

/// Sellmeier formula n² − 1 = c₁ + Σ B_j λ²/(λ² − C_j²), λ and C_j in µm, k = 0
/// (refractiveindex.info formula 1; W. Sellmeier, Ann. Phys. Chem. 219, 272 (1871)).
/// With c₁ = 0 this is the form used by I. H. Malitson, J. Opt. Soc. Am. 55, 1205 (1965).
#[derive(Clone, Debug)]
pub struct Sellmeier {
    /// Constant c₁ added to n² − 1 (0 in the classic form).
    pub c1: f64,
    /// Pairs (B_j, C_j), C_j a resonance wavelength in µm.
    pub terms: Vec<(f64, f64)>,
    /// Validity range in nm.
    pub range_nm: (f64, f64),
}

impl Sellmeier {
    /// Checked constructor: finite coefficients, no pole inside the range, n² > 0 over it.
    pub fn new(
        c1: f64,
        terms: Vec<(f64, f64)>,
        range_nm: (f64, f64),
    ) -> Result<Sellmeier, MaterialError> {
        check_range("sellmeier", range_nm)?;
        if !c1.is_finite() || terms.iter().any(|(b, c)| !b.is_finite() || !c.is_finite()) {
            return Err(invalid("sellmeier", "coefficients must be finite numbers"));
        }
        if let Some(&(_, c)) = terms
            .iter()
            .find(|(_, c)| (range_nm.0..=range_nm.1).contains(&(c.abs() * 1e3)))
        {
            return Err(invalid(
                "sellmeier",
                format!(
                    "resonance at {} nm lies inside the validity range",
                    c.abs() * 1e3
                ),
            ));
        }
        let m = Sellmeier {
            c1,
            terms,
            range_nm,
        };
        if let Some(wl) =
            sample_range(range_nm).find(|&wl| m.n_squared(wl).is_nan() || m.n_squared(wl) <= 0.0)
        {
            return Err(invalid(
                "sellmeier",
                format!("n² ≤ 0 at {wl:.1} nm inside the range"),
            ));
        }
        Ok(m)
    }

    fn n_squared(&self, wavelength_nm: f64) -> f64 {
        let l2 = (wavelength_nm * 1e-3).powi(2);
        1.0 + self.c1
            + self
                .terms
                .iter()
                .map(|&(b, c)| b * l2 / (l2 - c * c))
                .sum::<f64>()
    }

    /// n at `wavelength_nm`.
    pub fn n(&self, wavelength_nm: f64) -> f64 {
        self.n_squared(wavelength_nm).max(0.0).sqrt()
    }
}

/// 257 wavelengths spread evenly over a range, ends included (for sanity checks only).
fn sample_range(range_nm: (f64, f64)) -> impl Iterator<Item = f64> {
    let (lo, hi) = range_nm;
    (0..=256).map(move |i| lo + (hi - lo) * f64::from(i) / 256.0)
}

// ---------------------------------------------------------------------------------------------
// Tauc–Lorentz
// ---------------------------------------------------------------------------------------------

/// Tauc–Lorentz dielectric function for amorphous semiconductors and dielectrics.
///
/// ε2(E) = A E₀ C (E − E_g)² / [(E² − E₀²)² + C² E²] / E for E > E_g, and 0 for E ≤ E_g;
/// ε1 is the closed-form Kramers–Kronig transform plus ε1(∞). Energies in eV.
///
/// Source: G. E. Jellison Jr. & F. A. Modine, Appl. Phys. Lett. 69, 371 (1996),
/// with the erratum Appl. Phys. Lett. 69, 2137 (1996). The ε1 expression below was checked
/// against a numerical Kramers–Kronig integral of ε2 (tests/reference_materials.rs and the
/// unit tests of this file).
///
/// Parameters must satisfy A > 0, C > 0, E₀ > 0, 0 ≤ E_g < E₀ and C < √2 E₀ (so that the
/// auxiliary α = √(4E₀² − C²) and γ = √(E₀² − C²/2) are real).
#[derive(Clone, Debug)]
pub struct TaucLorentz {
    /// ε1 at infinite photon energy.
    pub eps_inf: f64,
    /// Amplitude A in eV.
    pub a_ev: f64,
    /// Peak transition energy E₀ in eV.
    pub e0_ev: f64,
    /// Broadening C in eV.
    pub c_ev: f64,
    /// Tauc gap E_g in eV.
    pub eg_ev: f64,
    /// Validity range in nm (from the fit that produced the parameters).
    pub range_nm: (f64, f64),
}

impl TaucLorentz {
    /// Checked constructor (see the parameter conditions on the type).
    pub fn new(
        eps_inf: f64,
        a_ev: f64,
        e0_ev: f64,
        c_ev: f64,
        eg_ev: f64,
        range_nm: (f64, f64),
    ) -> Result<TaucLorentz, MaterialError> {
        check_range("tauc-lorentz", range_nm)?;
        let all_finite = [eps_inf, a_ev, e0_ev, c_ev, eg_ev]
            .iter()
            .all(|x| x.is_finite());
        if !all_finite
            || a_ev <= 0.0
            || c_ev <= 0.0
            || e0_ev <= 0.0
            || eg_ev < 0.0
            || eg_ev >= e0_ev
            || c_ev * c_ev >= 2.0 * e0_ev * e0_ev
        {
            return Err(invalid(
                "tauc-lorentz",
                format!(
                    "parameters A = {a_ev}, E0 = {e0_ev}, C = {c_ev}, Eg = {eg_ev} eV must satisfy \
                     A > 0, C > 0, 0 ≤ Eg < E0, C < √2·E0"
                ),
            ));
        }
        Ok(TaucLorentz {
            eps_inf,
            a_ev,
            e0_ev,
            c_ev,
            eg_ev,
            range_nm,
        })
    }

    /// ε2 at photon energy `e_ev` (> 0).
    pub fn eps2(&self, e_ev: f64) -> f64 {
        let (a, e0, c, eg, e) = (self.a_ev, self.e0_ev, self.c_ev, self.eg_ev, e_ev);
        if e <= eg {
            return 0.0;
        }
        a * e0 * c * (e - eg).powi(2) / (((e * e - e0 * e0).powi(2) + c * c * e * e) * e)
    }

    /// ε1 at photon energy `e_ev` (> 0), closed form of Jellison & Modine (1996) with erratum.
    pub fn eps1(&self, e_ev: f64) -> f64 {
        let (a, e0, c, eg, e) = (self.a_ev, self.e0_ev, self.c_ev, self.eg_ev, e_ev);
        let (e2, e02, eg2, c2) = (e * e, e0 * e0, eg * eg, c * c);
        let alpha = (4.0 * e02 - c2).sqrt();
        let gamma2 = e02 - 0.5 * c2;
        let zeta4 = (e2 - gamma2).powi(2) + alpha * alpha * c2 / 4.0;
        let a_ln = (eg2 - e02) * e2 + eg2 * c2 - e02 * (e02 + 3.0 * eg2);
        let a_atan = (e2 - e02) * (e02 + eg2) + eg2 * c2;
        let pz = PI * zeta4;

        // Term 1: logarithm in E0, Eg, α.
        let t1 = a * c * a_ln / (2.0 * pz * alpha * e0)
            * ((e02 + eg2 + alpha * eg) / (e02 + eg2 - alpha * eg)).ln();
        // Term 2: arctangents.
        let t2 = -a * a_atan / (pz * e0)
            * (PI - ((2.0 * eg + alpha) / c).atan() + ((alpha - 2.0 * eg) / c).atan());
        // Term 3: arctangent in γ (the sign of the arctangent is the one fixed by the erratum;
        // the other sign fails the Kramers–Kronig check in the tests).
        let t3 = 2.0 * a * e0 * eg * (e2 - gamma2) / (pz * alpha)
            * (PI + 2.0 * ((2.0 * (gamma2 - eg2)) / (alpha * c)).atan());
        // Terms 4 + 5 of the paper combined so that E = Eg stays finite:
        // −(E²+Eg²)/E ln|E−Eg|/(E+Eg) + 2Eg ln[|E−Eg|(E+Eg)/√((E0²−Eg²)²+Eg²C²)]
        //   = (E+Eg)²/E ln(E+Eg) − (E−Eg)²/E ln|E−Eg| − Eg ln((E0²−Eg²)² + Eg²C²).
        let d = (e - eg).abs();
        let x2lnx = if d == 0.0 { 0.0 } else { d * d * d.ln() };
        let t45 = a * e0 * c / pz
            * ((e + eg).powi(2) / e * (e + eg).ln()
                - x2lnx / e
                - eg * ((e02 - eg2).powi(2) + eg2 * c2).ln());
        self.eps_inf + t1 + t2 + t3 + t45
    }

    /// N = √ε at `wavelength_nm` (principal root: n ≥ 0, k ≥ 0).
    pub fn index(&self, wavelength_nm: f64) -> Index {
        let e = HC_EV_NM / wavelength_nm;
        Complex64::new(self.eps1(e), self.eps2(e)).sqrt()
    }
}

// ---------------------------------------------------------------------------------------------
// Drude–Lorentz
// ---------------------------------------------------------------------------------------------

/// Drude free-carrier term (energies in eV).
#[derive(Clone, Copy, Debug)]
pub struct DrudeTerm {
    /// Plasma energy ħω_p.
    pub plasma_ev: f64,
    /// Damping ħγ.
    pub gamma_ev: f64,
}

/// One Lorentz oscillator f ω₀²/(ω₀² − ω² − iγω) (energies in eV, strength dimensionless).
#[derive(Clone, Copy, Debug)]
pub struct LorentzOscillator {
    /// Oscillator strength f (its contribution to the static ε).
    pub strength: f64,
    /// Resonance energy ħω₀.
    pub e0_ev: f64,
    /// Damping ħγ.
    pub gamma_ev: f64,
}

/// Drude–Lorentz dielectric function
/// ε(ω) = ε∞ − ω_p²/(ω² + iγω) + Σ_j f_j ω₀ⱼ²/(ω₀ⱼ² − ω² − iγⱼω), with ħω in eV.
///
/// Sign convention: fields ∝ e^{−iωt}, so damping (γ > 0) gives Im ε > 0 and k ≥ 0, matching
/// N = n + ik used throughout. Source: e.g. M. Dressel & G. Grüner, *Electrodynamics of
/// Solids*, Cambridge Univ. Press (2002) (Drude and Lorentz models); the same form
/// with this sign is used by A. D. Rakić et al., Appl. Opt. 37, 5271 (1998) (from
/// memory).
#[derive(Clone, Debug)]
pub struct DrudeLorentz {
    /// ε at energies far above every resonance.
    pub eps_inf: f64,
    /// Optional free-carrier term.
    pub drude: Option<DrudeTerm>,
    /// Bound oscillators.
    pub oscillators: Vec<LorentzOscillator>,
    /// Validity range in nm.
    pub range_nm: (f64, f64),
}

impl DrudeLorentz {
    /// Checked constructor: finite parameters, energies and dampings ≥ 0, strengths ≥ 0.
    pub fn new(
        eps_inf: f64,
        drude: Option<DrudeTerm>,
        oscillators: Vec<LorentzOscillator>,
        range_nm: (f64, f64),
    ) -> Result<DrudeLorentz, MaterialError> {
        check_range("drude-lorentz", range_nm)?;
        let drude_ok = drude.is_none_or(|d| {
            d.plasma_ev.is_finite()
                && d.gamma_ev.is_finite()
                && d.plasma_ev >= 0.0
                && d.gamma_ev >= 0.0
        });
        let osc_ok = oscillators.iter().all(|o| {
            [o.strength, o.e0_ev, o.gamma_ev]
                .iter()
                .all(|x| x.is_finite() && *x >= 0.0)
                && o.e0_ev > 0.0
        });
        if !eps_inf.is_finite() || !drude_ok || !osc_ok {
            return Err(invalid(
                "drude-lorentz",
                "parameters must be finite; energies > 0, dampings and strengths ≥ 0",
            ));
        }
        Ok(DrudeLorentz {
            eps_inf,
            drude,
            oscillators,
            range_nm,
        })
    }

    /// ε at photon energy `e_ev` (> 0).
    pub fn eps(&self, e_ev: f64) -> Complex64 {
        let w = e_ev;
        let mut eps = Complex64::new(self.eps_inf, 0.0);
        if let Some(d) = self.drude {
            eps -= d.plasma_ev * d.plasma_ev / Complex64::new(w * w, d.gamma_ev * w);
        }
        for o in &self.oscillators {
            let w02 = o.e0_ev * o.e0_ev;
            eps += o.strength * w02 / Complex64::new(w02 - w * w, -o.gamma_ev * w);
        }
        eps
    }

    /// N = √ε at `wavelength_nm` (principal root: Im ε ≥ 0 gives n ≥ 0, k ≥ 0).
    pub fn index(&self, wavelength_nm: f64) -> Index {
        self.eps(HC_EV_NM / wavelength_nm).sqrt()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// ε1(E) − ε∞ = (2/π) P∫₀^∞ ξ ε2(ξ)/(ξ² − E²) dξ, by subtracting the pole:
    /// ∫₀^X [f(ξ) − f(E)]/(ξ² − E²) dξ + f(E) P∫₀^X dξ/(ξ²−E²) with f(ξ) = ξ ε2(ξ),
    /// P∫₀^X dξ/(ξ² − E²) = ln((X − E)/(X + E))/(2E); the tail of f beyond X is neglected
    /// (f ~ ξ⁻², error ~ 1/X³).
    fn kk_eps1(m: &TaucLorentz, e: f64) -> f64 {
        let f = |x: f64| x * m.eps2(x);
        let fe = f(e);
        let big_x = 2000.0;
        // Composite Simpson on [0, X] with a node spacing that does not hit ξ = E exactly,
        // split at Eg where ε2 switches on and refined near E.
        let pieces = [0.0, m.eg_ev, (e - 0.5).max(m.eg_ev), e + 0.5, 20.0, big_x];
        let mut total = 0.0;
        for w in pieces.windows(2) {
            let (a, b) = (w[0], w[1]);
            if b <= a {
                continue;
            }
            let n = 200_000;
            let h = (b - a) / n as f64;
            let g = |x: f64| {
                let d = x * x - e * e;
                if d.abs() < 1e-9 {
                    // Limit f'(E)/(2E) by a central difference.
                    (f(e + 1e-5) - f(e - 1e-5)) / 2e-5 / (2.0 * e)
                } else {
                    (f(x) - fe) / d
                }
            };
            let mut s = g(a) + g(b);
            for i in 1..n {
                s += g(a + i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
            }
            total += s * h / 3.0;
        }
        total += fe * ((big_x - e) / (big_x + e)).ln() / (2.0 * e);
        m.eps_inf + 2.0 / PI * total
    }

    #[test]
    fn tauc_lorentz_eps1_is_the_kramers_kronig_transform_of_eps2() {
        // Parameters of the order of amorphous Si (Jellison & Modine 1996 fit values are similar).
        let m = TaucLorentz::new(1.15, 122.0, 3.45, 2.54, 1.20, (200.0, 2000.0)).unwrap();
        for e in [0.8, 1.2, 1.5, 2.5, 3.45, 5.0] {
            let closed = m.eps1(e);
            let numeric = kk_eps1(&m, e);
            assert!(
                (closed - numeric).abs() < 1e-4 * closed.abs().max(1.0),
                "E = {e} eV: closed form {closed}, numerical KK {numeric}"
            );
        }
    }

    #[test]
    fn tauc_lorentz_is_finite_at_the_gap() {
        let m = TaucLorentz::new(1.0, 100.0, 3.5, 2.0, 1.5, (200.0, 2000.0)).unwrap();
        let at = m.eps1(1.5);
        let near = m.eps1(1.5 + 1e-9);
        assert!(at.is_finite() && (at - near).abs() < 1e-6);
    }

    #[test]
    fn table_interpolates_linearly_and_hits_nodes() {
        let t = Table::new(&[(500.0, 2.0, 0.0), (600.0, 3.0, 0.2)]).unwrap();
        assert_eq!(t.interpolate(500.0), Complex64::new(2.0, 0.0));
        assert_eq!(t.interpolate(600.0), Complex64::new(3.0, 0.2));
        let mid = t.interpolate(575.0);
        assert!((mid.re - 2.75).abs() < 1e-15 && (mid.im - 0.15).abs() < 1e-15);
    }

    #[test]
    fn sellmeier_rejects_pole_in_range() {
        assert!(Sellmeier::new(0.0, vec![(1.0, 0.5)], (300.0, 800.0)).is_err());
    }
}

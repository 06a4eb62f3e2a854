//! Redistribution matrices of one interface at one wavelength, their builders and audits.
//!
//! # Normalisation
//!
//! Column `j` of every matrix is the fate of the power arriving in bin `j` with a **uniform
//! radiance within the bin** (uniform in sin²θ and φ over the bin, i.e. power spread in
//! proportion to étendue), as fractions of that power: `R[i, j]` is the fraction leaving
//! back into the incidence medium in bin `i`, `T[i, j]` the fraction entering the other
//! medium in bin `i`, `A[l, j]` the fraction absorbed in film layer `l`. For every column
//! Σᵢ R + Σᵢ T + Σₗ A = 1 (the energy audit measures the departure; Monte Carlo columns miss
//! exactly the weight of rays lost to numerics).
//!
//! * `from_above`: incoming bins travel down in the medium above; R rows are up-going bins
//!   of the medium above, T rows down-going bins of the medium below.
//! * `from_below`: incoming bins travel up in the medium below; R rows are down-going bins of
//!   the medium below, T rows up-going bins of the medium above.
//!
//! # Reciprocity (audit)
//!
//! For a reciprocal interface between media of real indices, the scattering kernel obeys
//! f(ω_in → ω_out) / n_out² = f(−ω_out → −ω_in) / n_in² (Helmholtz reciprocity with the n²
//! étendue factor; E. Veach, PhD thesis, Stanford (1997), §5.2, from memory). A matrix
//! element is M[i, j] = F_ij / ε_j where F_ij = ∬ f cos θ_in cos θ_out dω_in dω_out over
//! bins j and i, and ε_j is the étendue of bin j. Hence, with `rev(k)` the bin of
//! azimuth φ + π ([`AngleBins::reversed`]) and n the medium index of each bin:
//!
//! ```text
//!   n_j² ε_j M[i, j] = n_i² ε_i M'[rev j, rev i]
//! ```
//!
//! where M' is the matrix of the reversed process: M' = M for R (same side), and
//! M' = T from the other side for T. Same-medium R: ε_j R[i, j] = ε_i R[rev j, rev i].
//! The audit stores max |M[i, j] − (n_i² ε_i)/(n_j² ε_j) M'[rev j, rev i]| over all pairs,
//! and for Monte Carlo matrices also the largest ratio of that residual to its standard
//! error (expected below ≈ √(2 ln 2N) + 1 for N compared pairs, Gaussian extreme value).
//! The relation holds with absorbing films too (Lorentz reciprocity), so it is computed for
//! every interface; `lossless` says whether the absorption is zero.

use super::MatrixError;
use super::bins::AngleBins;
use super::dense::Matrix;
use super::quad::{Singular, nodes};

/// Which side the light arrives from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Side {
    /// Light travels down in the medium above.
    Above,
    /// Light travels up in the medium below.
    Below,
}

/// One semi-infinite (or thick) medium beside an interface: an id and the real index used
/// for Snell's law and étendue (the real part of n + ik: absorption in thick layers is taken
/// along the path, not in the interface response). `k` matters only for a strongly absorbing
/// semi-infinite medium (a metal): see [`InterfaceMatrices::planar`].
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct MediumInfo {
    pub id: String,
    pub n: f64,
    /// Extinction coefficient k ≥ 0 (0 when absent from a file).
    #[serde(default)]
    pub k: f64,
}

impl MediumInfo {
    /// A medium with real index `n` (k = 0).
    pub fn new(id: impl Into<String>, n: f64) -> Self {
        MediumInfo {
            id: id.into(),
            n,
            k: 0.0,
        }
    }
    /// An absorbing medium n + ik (e.g. the metal of a rear reflector).
    pub fn absorbing(id: impl Into<String>, n: f64, k: f64) -> Self {
        MediumInfo {
            id: id.into(),
            n,
            k,
        }
    }
}

/// Everything that identifies an interface's matrices except the numbers.
#[derive(Clone, Debug, PartialEq)]
pub struct InterfaceSetup {
    pub bins: AngleBins,
    pub wavelength_nm: f64,
    pub above: MediumInfo,
    pub below: MediumInfo,
    /// Names of the absorbing film layers, top to bottom (rows of the absorption matrices).
    pub film_layers: Vec<String>,
}

impl InterfaceSetup {
    fn validate(&self) -> Result<(), MatrixError> {
        let ok_n = |m: &MediumInfo| m.n.is_finite() && m.n > 0.0 && m.k.is_finite() && m.k >= 0.0;
        if !(self.wavelength_nm.is_finite() && self.wavelength_nm > 0.0) {
            return Err(MatrixError::setup(
                format!("wavelength {} nm", self.wavelength_nm),
                "a positive wavelength in nm",
                "pass the vacuum wavelength in nm",
            ));
        }
        for m in [&self.above, &self.below] {
            if !ok_n(m) {
                return Err(MatrixError::setup(
                    format!("medium `{}` has index n = {}, k = {}", m.id, m.n, m.k),
                    "finite n > 0 and k ≥ 0",
                    "give the real part of the medium's index at this wavelength",
                ));
            }
        }
        Ok(())
    }
    /// Real index of the medium light arrives in from `side`, and of the other medium.
    pub fn indices(&self, side: Side) -> (f64, f64) {
        match side {
            Side::Above => (self.above.n, self.below.n),
            Side::Below => (self.below.n, self.above.n),
        }
    }
}

/// Response of a (coated) interface to light arriving from one side at one angle, for the
/// polarisation state the builder assumes (usually unpolarised): fractions of the incident
/// power. `absorptance` has one entry per film layer, top to bottom.
#[derive(Clone, Debug, PartialEq)]
pub struct InterfaceResponse {
    pub reflectance: f64,
    pub transmittance: f64,
    pub absorptance: Vec<f64>,
}

impl InterfaceResponse {
    /// A response without film absorption.
    pub fn lossless(reflectance: f64, transmittance: f64) -> Self {
        InterfaceResponse {
            reflectance,
            transmittance,
            absorptance: Vec::new(),
        }
    }
}

/// R, T and per-layer absorption for light arriving from one side.
#[derive(Clone, Debug, PartialEq)]
pub struct SideMatrices {
    /// n × n: rows outgoing bins back in the incidence medium, columns incoming bins.
    pub reflection: Matrix,
    /// n × n: rows outgoing bins in the other medium, columns incoming bins.
    pub transmission: Matrix,
    /// L × n: rows film layers (top to bottom), columns incoming bins.
    pub absorption: Matrix,
}

impl SideMatrices {
    pub fn zeros(n: usize, layers: usize) -> Self {
        SideMatrices {
            reflection: Matrix::zeros(n, n),
            transmission: Matrix::zeros(n, n),
            absorption: Matrix::zeros(layers, n),
        }
    }
    /// Σ R + Σ T + Σ A of column j.
    pub fn column_total(&self, j: usize) -> f64 {
        self.reflection.column_sum(j)
            + self.transmission.column_sum(j)
            + self.absorption.column_sum(j)
    }
    /// Σ R + Σ T + Σ A of every column (row-major passes; use this over `column_total` in
    /// loops over all columns).
    pub fn column_totals(&self) -> Vec<f64> {
        let mut t = self.reflection.column_sums();
        for m in [&self.transmission, &self.absorption] {
            t.iter_mut().zip(m.column_sums()).for_each(|(a, b)| *a += b);
        }
        t
    }
}

/// Audits stored with every matrix set (see the module doc for their definitions).
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Audit {
    /// max over columns and both sides of |Σ R + Σ T + Σ A − 1|.
    pub energy_max_abs: f64,
    /// max |M[i, j] − (n_i² ε_i)/(n_j² ε_j) M'[rev j, rev i]|; `None` if the bins have no
    /// reversed azimuth (no symmetry with an odd number of azimuthal bins).
    pub reciprocity_max_abs: Option<f64>,
    /// For Monte Carlo matrices: the largest residual / standard error over pairs with a
    /// nonzero error. `None` for analytic matrices.
    pub reciprocity_max_sigma: Option<f64>,
    /// Number of compared pairs (for the Monte Carlo tolerance √(2 ln 2N) + 1).
    pub reciprocity_pairs: usize,
    /// True when every absorption entry is zero.
    pub lossless: bool,
}

/// The full set of redistribution matrices of one interface at one wavelength.
#[derive(Clone, Debug, PartialEq)]
pub struct InterfaceMatrices {
    pub setup: InterfaceSetup,
    pub from_above: SideMatrices,
    pub from_below: SideMatrices,
    /// Standard errors (Monte Carlo), same shapes; NaN where fewer than two batches.
    pub std_error: Option<(SideMatrices, SideMatrices)>,
    /// How the matrices were made (e.g. "analytic planar", "monte carlo: 1000000 rays").
    pub provenance: String,
    pub audit: Audit,
}

impl InterfaceMatrices {
    /// Assembles and audits a matrix set; checks every shape against the setup.
    pub fn new(
        setup: InterfaceSetup,
        from_above: SideMatrices,
        from_below: SideMatrices,
        std_error: Option<(SideMatrices, SideMatrices)>,
        provenance: impl Into<String>,
    ) -> Result<Self, MatrixError> {
        setup.validate()?;
        let (n, l) = (setup.bins.len(), setup.film_layers.len());
        let mut sets = vec![("from above", &from_above), ("from below", &from_below)];
        if let Some((a, b)) = &std_error {
            sets.push(("standard error from above", a));
            sets.push(("standard error from below", b));
        }
        for (name, s) in sets {
            for (what, m, rows) in [
                ("reflection", &s.reflection, n),
                ("transmission", &s.transmission, n),
                ("absorption", &s.absorption, l),
            ] {
                if m.rows() != rows || m.cols() != n {
                    return Err(MatrixError::setup(
                        format!("{what} matrix {name} is {} × {}", m.rows(), m.cols()),
                        &format!("{rows} × {n} for {n} bins and {l} film layers"),
                        "build the matrices with the same bins and layer list as the setup",
                    ));
                }
            }
        }
        let mut m = InterfaceMatrices {
            setup,
            from_above,
            from_below,
            std_error,
            provenance: provenance.into(),
            audit: Audit {
                energy_max_abs: 0.0,
                reciprocity_max_abs: None,
                reciprocity_max_sigma: None,
                reciprocity_pairs: 0,
                lossless: true,
            },
        };
        m.audit = m.compute_audit();
        Ok(m)
    }

    /// Number of bins per hemisphere.
    pub fn n_bins(&self) -> usize {
        self.setup.bins.len()
    }

    /// Matrices for light arriving from `side`.
    pub fn side(&self, side: Side) -> &SideMatrices {
        match side {
            Side::Above => &self.from_above,
            Side::Below => &self.from_below,
        }
    }

    /// Recomputes the audits from the current numbers.
    pub fn compute_audit(&self) -> Audit {
        let n = self.n_bins();
        let bins = &self.setup.bins;
        let mut energy: f64 = 0.0;
        for s in [&self.from_above, &self.from_below] {
            for t in s.column_totals() {
                energy = energy.max((t - 1.0).abs());
            }
        }
        let lossless = self.from_above.absorption.max_abs() == 0.0
            && self.from_below.absorption.max_abs() == 0.0;
        // Reciprocity: pairs (M, M', n_in, n_out, se, se').
        let (na2, nb2) = (self.setup.above.n.powi(2), self.setup.below.n.powi(2));
        let se = self.std_error.as_ref();
        let cases = [
            (
                &self.from_above.reflection,
                &self.from_above.reflection,
                na2,
                na2,
                se.map(|e| (&e.0.reflection, &e.0.reflection)),
            ),
            (
                &self.from_below.reflection,
                &self.from_below.reflection,
                nb2,
                nb2,
                se.map(|e| (&e.1.reflection, &e.1.reflection)),
            ),
            (
                &self.from_above.transmission,
                &self.from_below.transmission,
                na2,
                nb2,
                se.map(|e| (&e.0.transmission, &e.1.transmission)),
            ),
        ];
        let mut max_abs: f64 = 0.0;
        let mut max_sigma: Option<f64> = se.map(|_| 0.0);
        let mut pairs = 0usize;
        let rev: Option<Vec<usize>> = (0..n).map(|i| bins.reversed(i)).collect();
        let etendue: Vec<f64> = (0..n).map(|i| bins.etendue(i)).collect();
        if let Some(rev) = &rev {
            // Tiles of (i, j) so that both M[i, j] and M'[rev j, rev i] stay in cache (the
            // second is a transposed access).
            const TILE: usize = 32;
            for (m, mr, n_in2, n_out2, errs) in cases {
                for j0 in (0..n).step_by(TILE) {
                    for i0 in (0..n).step_by(TILE) {
                        for j in j0..(j0 + TILE).min(n) {
                            let rj = rev[j];
                            for i in i0..(i0 + TILE).min(n) {
                                let ri = rev[i];
                                let c = (n_out2 * etendue[i]) / (n_in2 * etendue[j]);
                                let (a, b) = (m.get(i, j), mr.get(rj, ri));
                                let d = (a - c * b).abs();
                                max_abs = max_abs.max(d);
                                if let (Some((ea, eb)), Some(ms)) = (errs, max_sigma.as_mut()) {
                                    let sig = (ea.get(i, j).powi(2) + (c * eb.get(rj, ri)).powi(2))
                                        .sqrt();
                                    if sig > 0.0 && sig.is_finite() {
                                        *ms = ms.max(d / sig);
                                    }
                                }
                            }
                        }
                    }
                }
                pairs += n * n;
            }
        }
        let reversible = rev.is_some();
        Audit {
            energy_max_abs: energy,
            reciprocity_max_abs: reversible.then_some(max_abs),
            reciprocity_max_sigma: if reversible { max_sigma } else { None },
            reciprocity_pairs: if reversible { pairs } else { 0 },
            lossless,
        }
    }

    /// The same interface on coarser bins that nest in these ([`AngleBins::coarse_map`],
    /// e.g. from [`AngleBins::merged_pairs`]), from the same numbers: a coarse column is the
    /// étendue-weighted mean of the fine columns it holds (uniform radiance over the coarse
    /// bin spreads its power over the fine bins in proportion to étendue) and a coarse row is
    /// the sum of its fine rows. This is exactly what building the matrices on the coarse bins
    /// would estimate (up to quadrature error for analytic matrices, and from the same rays for
    /// traced ones), at the cost of O(n²) additions.
    ///
    /// Standard errors, if any, are carried over conservatively: a coarse element's error is
    /// √(Σ_j w_j² (Σ_{i∈row} σ_ij)²) (columns independent, rows of one column added as if
    /// fully correlated). Cost and memory: one pass over the fine matrices.
    pub fn merged(&self, coarse: &AngleBins) -> Result<Self, MatrixError> {
        let fine = &self.setup.bins;
        let map = fine.coarse_map(coarse).ok_or_else(|| {
            MatrixError::setup(
                format!(
                    "bins of {} × {} ({}) do not nest in {} × {} ({})",
                    fine.n_polar(),
                    fine.n_azimuth(),
                    fine.symmetry_name(),
                    coarse.n_polar(),
                    coarse.n_azimuth(),
                    coarse.symmetry_name()
                ),
                "coarse bins whose polar edges are a subset of the fine ones, the same symmetry and an azimuth count dividing the fine one",
                "make the coarse bins with AngleBins::merged_pairs",
            )
        })?;
        let (nf, nc, l) = (fine.len(), coarse.len(), self.setup.film_layers.len());
        let mut group_etendue = vec![0.0; nc];
        for (j, &g) in map.iter().enumerate() {
            group_etendue[g] += fine.etendue(j);
        }
        let w: Vec<f64> = (0..nf)
            .map(|j| fine.etendue(j) / group_etendue[map[j]])
            .collect();
        let merge = |s: &SideMatrices| {
            let mut out = SideMatrices::zeros(nc, l);
            for (src, dst) in [
                (&s.reflection, &mut out.reflection),
                (&s.transmission, &mut out.transmission),
            ] {
                for i in 0..nf {
                    let (row, gi) = (src.row(i), map[i]);
                    for (j, x) in row.iter().enumerate() {
                        if *x != 0.0 {
                            dst.add_at(gi, map[j], w[j] * x);
                        }
                    }
                }
            }
            for k in 0..l {
                for (j, x) in s.absorption.row(k).iter().enumerate() {
                    out.absorption.add_at(k, map[j], w[j] * x);
                }
            }
            out
        };
        // σ: first Σ over the rows of a group (per fine column), then the quadrature sum
        // over the fine columns of a coarse column.
        let merge_se = |s: &SideMatrices| {
            let mut out = SideMatrices::zeros(nc, l);
            for (src, dst) in [
                (&s.reflection, &mut out.reflection),
                (&s.transmission, &mut out.transmission),
            ] {
                let mut rows = Matrix::zeros(nc, nf);
                for (i, &gi) in map.iter().enumerate() {
                    for (j, x) in src.row(i).iter().enumerate() {
                        rows.add_at(gi, j, *x);
                    }
                }
                for g in 0..nc {
                    for (j, x) in rows.row(g).iter().enumerate() {
                        dst.add_at(g, map[j], (w[j] * x).powi(2));
                    }
                }
                dst.as_mut_slice().iter_mut().for_each(|v| *v = v.sqrt());
            }
            for k in 0..l {
                for (j, x) in s.absorption.row(k).iter().enumerate() {
                    out.absorption.add_at(k, map[j], (w[j] * x).powi(2));
                }
            }
            out.absorption
                .as_mut_slice()
                .iter_mut()
                .for_each(|v| *v = v.sqrt());
            out
        };
        let setup = InterfaceSetup {
            bins: coarse.clone(),
            ..self.setup.clone()
        };
        Self::new(
            setup,
            merge(&self.from_above),
            merge(&self.from_below),
            self.std_error
                .as_ref()
                .map(|(a, b)| (merge_se(a), merge_se(b))),
            format!(
                "{}; merged from {} × {} to {} × {} bins",
                self.provenance,
                fine.n_polar(),
                fine.n_azimuth(),
                coarse.n_polar(),
                coarse.n_azimuth()
            ),
        )
    }

    /// Specular planar interface from a response closure.
    ///
    /// `response(cos_theta, side)` gives R, T and film absorptances for light arriving from
    /// `side` at polar angle θ in the incidence medium. Reflection sends bin j to the mirror
    /// bin (same index, other hemisphere). Transmission follows Snell's law with the real
    /// indices, s_t = (n_i/n_t)² s_i in sin²θ, keeping the azimuth bin. Each incoming bin is
    /// cut where its image crosses an outgoing bin edge or the critical angle, and the
    /// response is averaged over each piece by 10-point Gauss–Legendre quadrature in
    /// s = sin²θ (uniform radiance ⇒ uniform power in s), with the substitution s = end ∓ u²
    /// at grazing incidence and at the critical angle where R, T behave like √(end − s).
    /// The split makes the bin-to-bin transfer exact; the quadrature error for Fresnel
    /// responses is ≲ 1e-13 (test `planar_average_matches_fine_quadrature`).
    ///
    /// Beyond the critical angle of the real indices the response must give T = 0, unless
    /// the medium entered absorbs (`k > 0`, e.g. a metal below a rear mirror): there the
    /// transmitted power is absorbed within a wavelength and is booked into the most grazing
    /// bin of that medium, so use this only for the semi-infinite medium below a stack.
    pub fn planar<F>(setup: InterfaceSetup, response: F) -> Result<Self, MatrixError>
    where
        F: Fn(f64, Side) -> InterfaceResponse,
    {
        setup.validate()?;
        let mut sides = Vec::with_capacity(2);
        for side in [Side::Above, Side::Below] {
            sides.push(planar_side(&setup, side, &response)?);
        }
        let from_below = sides.pop().expect("two sides");
        let from_above = sides.pop().expect("two sides");
        Self::new(
            setup,
            from_above,
            from_below,
            None,
            "analytic planar (specular)",
        )
    }

    /// Specular planar interface coated with a coherent thin-film stack: [`Self::planar`]
    /// with the unpolarised response of `films` from each side (transfer-matrix method,
    /// [`crate::thinfilm`]); absorptance rows are the film layers top to bottom.
    /// `films.above()` and `films.below()` must have the real indices of the setup's media
    /// (thick media enter the film calculation with their real part; their absorption is
    /// taken along the path) — except a metal below, given with its k in both.
    pub fn planar_film(
        setup: InterfaceSetup,
        films: &crate::thinfilm::FilmStack,
    ) -> Result<Self, MatrixError> {
        let (a, b) = (films.above(), films.below());
        let same = |m: &MediumInfo, n: crate::optics::Index| {
            (m.n - n.re).abs() <= 1e-9 * m.n && (m.k - n.im).abs() <= 1e-9 * m.k.max(1.0)
        };
        if !same(&setup.above, a)
            || !same(&setup.below, b)
            || films.n_layers() != setup.film_layers.len()
        {
            return Err(MatrixError::setup(
                format!(
                    "film stack {} + {}i | {} layer(s) | {} + {}i against media {} ({}), {} ({}) with {} film layer name(s)",
                    a.re,
                    a.im,
                    films.n_layers(),
                    b.re,
                    b.im,
                    setup.above.id,
                    setup.above.n,
                    setup.below.id,
                    setup.below.n,
                    setup.film_layers.len()
                ),
                "the film stack's half-spaces equal to the setup's media (n, k) and one name per film layer",
                "build the FilmStack with the real parts of the thick media's indices and name every layer",
            ));
        }
        let wl = setup.wavelength_nm;
        let from_below = films.reversed();
        Self::planar(setup, move |c, side| {
            let (stack, flip) = match side {
                Side::Above => (films, false),
                Side::Below => (&from_below, true),
            };
            let r = stack.solve(wl, c);
            let mut absorptance: Vec<f64> = (0..stack.n_layers())
                .map(|l| r.absorptance_unpolarised(l))
                .collect();
            if flip {
                absorptance.reverse();
            }
            InterfaceResponse {
                reflectance: r.reflectance_unpolarised(),
                transmittance: r.transmittance_unpolarised(),
                absorptance,
            }
        })
    }

    /// Ideal Lambertian interface from a response closure: the power of incoming bin j is
    /// split into R, T and A by the response averaged over bin j (as in [`Self::planar`]),
    /// and R and T are each spread over all outgoing bins of their hemisphere in proportion
    /// to étendue, ε_i / π (Lambertian radiance fills the whole hemisphere; no Snell cone).
    /// Reciprocity holds only for responses with n_a² T_a = n_b² T_b and angle-independent
    /// R (e.g. the ideal randomiser used for the 4n² limit); the audit reports the rest.
    pub fn lambertian<F>(setup: InterfaceSetup, response: F) -> Result<Self, MatrixError>
    where
        F: Fn(f64, Side) -> InterfaceResponse,
    {
        setup.validate()?;
        let bins = &setup.bins;
        let (n, l) = (bins.len(), setup.film_layers.len());
        let mut sides = Vec::with_capacity(2);
        for side in [Side::Above, Side::Below] {
            let (n_i, n_t) = setup.indices(side);
            let s_c = critical_sin2(n_i, n_t);
            let mut m = SideMatrices::zeros(n, l);
            for p in 0..bins.n_polar() {
                let (s0, s1) = bins.sin2_range(p);
                let mut cuts = vec![(s0, false)];
                if let Some(c) = s_c.filter(|c| *c > s0 && *c < s1) {
                    cuts.push((c, true));
                }
                cuts.push((s1, s1 == 1.0));
                let mut avg = (0.0, 0.0, vec![0.0; l]);
                for w in cuts.windows(2) {
                    let (r, t, a) = integrate_piece(&response, side, w[0], w[1], l)?;
                    avg.0 += r;
                    avg.1 += t;
                    for (x, y) in avg.2.iter_mut().zip(&a) {
                        *x += y;
                    }
                }
                let ds = s1 - s0;
                for a in 0..bins.n_azimuth() {
                    let j = p * bins.n_azimuth() + a;
                    for i in 0..n {
                        let f = bins.etendue(i) / std::f64::consts::PI;
                        m.reflection.set(i, j, avg.0 / ds * f);
                        m.transmission.set(i, j, avg.1 / ds * f);
                    }
                    for (k, x) in avg.2.iter().enumerate() {
                        m.absorption.set(k, j, x / ds);
                    }
                }
            }
            sides.push(m);
        }
        let from_below = sides.pop().expect("two sides");
        let from_above = sides.pop().expect("two sides");
        Self::new(
            setup,
            from_above,
            from_below,
            None,
            "analytic ideal Lambertian",
        )
    }
}

/// sin²θ of the critical angle in the incidence medium, if n_i > n_t.
fn critical_sin2(n_i: f64, n_t: f64) -> Option<f64> {
    (n_i > n_t).then(|| (n_t / n_i).powi(2))
}

/// ∫ R ds, ∫ T ds, ∫ A_l ds over [lo, hi] (flags: square-root behaviour at that end).
fn integrate_piece<F>(
    response: &F,
    side: Side,
    lo: (f64, bool),
    hi: (f64, bool),
    layers: usize,
) -> Result<(f64, f64, Vec<f64>), MatrixError>
where
    F: Fn(f64, Side) -> InterfaceResponse,
{
    let mut out = (0.0, 0.0, vec![0.0; layers]);
    let mut add = |a: f64, b: f64, sing: Singular| -> Result<(), MatrixError> {
        for (s, w) in nodes(a, b, sing) {
            let cos_theta = (1.0 - s).max(0.0).sqrt();
            let r = checked_response(response, cos_theta, side, layers)?;
            out.0 += w * r.reflectance;
            out.1 += w * r.transmittance;
            for (x, y) in out.2.iter_mut().zip(&r.absorptance) {
                *x += w * y;
            }
        }
        Ok(())
    };
    match (lo.1, hi.1) {
        (false, false) => add(lo.0, hi.0, Singular::None)?,
        (true, false) => add(lo.0, hi.0, Singular::Low)?,
        (false, true) => add(lo.0, hi.0, Singular::High)?,
        (true, true) => {
            let mid = 0.5 * (lo.0 + hi.0);
            add(lo.0, mid, Singular::Low)?;
            add(mid, hi.0, Singular::High)?;
        }
    }
    Ok(out)
}

/// Calls the response and checks it is a set of fractions summing to 1 (to 1e-9).
pub(crate) fn checked_response<F>(
    response: &F,
    cos_theta: f64,
    side: Side,
    layers: usize,
) -> Result<InterfaceResponse, MatrixError>
where
    F: Fn(f64, Side) -> InterfaceResponse,
{
    let r = response(cos_theta, side);
    let fail = |problem: String| MatrixError::Response {
        side,
        angle_deg: cos_theta.clamp(-1.0, 1.0).acos().to_degrees(),
        problem,
    };
    if r.absorptance.len() != layers {
        return Err(fail(format!(
            "{} absorptance value(s) for {layers} film layer(s)",
            r.absorptance.len()
        )));
    }
    let parts = [r.reflectance, r.transmittance]
        .into_iter()
        .chain(r.absorptance.iter().copied());
    let mut total = 0.0;
    for x in parts {
        if !(x.is_finite() && (-1e-12..=1.0 + 1e-12).contains(&x)) {
            return Err(fail(format!("a fraction equals {x}, outside [0, 1]")));
        }
        total += x;
    }
    if (total - 1.0).abs() > 1e-9 {
        return Err(fail(format!(
            "R + T + ΣA = {total}, expected 1 within 1e-9"
        )));
    }
    Ok(r)
}

fn planar_side<F>(
    setup: &InterfaceSetup,
    side: Side,
    response: &F,
) -> Result<SideMatrices, MatrixError>
where
    F: Fn(f64, Side) -> InterfaceResponse,
{
    let bins = &setup.bins;
    let (n, l, na) = (bins.len(), setup.film_layers.len(), bins.n_azimuth());
    let (n_i, n_t) = setup.indices(side);
    let ratio2 = (n_i / n_t).powi(2);
    let entered_absorbs = match side {
        Side::Above => setup.below.k > 0.0,
        Side::Below => setup.above.k > 0.0,
    };
    let mut m = SideMatrices::zeros(n, l);
    for p in 0..bins.n_polar() {
        let (s0, s1) = bins.sin2_range(p);
        // Cut points: pre-images of outgoing edges (edge 1 is the critical angle, singular).
        let mut cuts = vec![(s0, false)];
        for (k, e) in bins.sin2_edges().iter().enumerate().skip(1) {
            let s = e / ratio2;
            if s > s0 && s < s1 {
                cuts.push((s, k == bins.n_polar()));
            }
        }
        cuts.push((s1, s1 == 1.0));
        let ds = s1 - s0;
        for w in cuts.windows(2) {
            let (r, t, a) = integrate_piece(response, side, w[0], w[1], l)?;
            let s_t = ratio2 * 0.5 * (w[0].0 + w[1].0);
            for az in 0..na {
                let j = p * na + az;
                m.reflection.add_at(j, j, r / ds);
                for (k, x) in a.iter().enumerate() {
                    m.absorption.add_at(k, j, x / ds);
                }
                if s_t < 1.0 {
                    let q = bins.polar_index_sin2(s_t);
                    m.transmission.add_at(q * na + az, j, t / ds);
                } else if entered_absorbs {
                    let q = bins.n_polar() - 1;
                    m.transmission.add_at(q * na + az, j, t / ds);
                } else if t.abs() > 1e-12 * ds {
                    return Err(MatrixError::Response {
                        side,
                        angle_deg: (0.5 * (w[0].0 + w[1].0)).sqrt().asin().to_degrees(),
                        problem: format!(
                            "transmittance {:.3e} beyond the critical angle (n {} → {})",
                            t / (w[1].0 - w[0].0),
                            n_i,
                            n_t
                        ),
                    });
                }
            }
        }
    }
    Ok(m)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::texture::Symmetry;

    /// Unpolarised Fresnel reflectance between real indices (Born & Wolf, 7th ed., §1.5.2).
    fn fresnel(cos_i: f64, n_i: f64, n_t: f64) -> f64 {
        let s_t2 = (n_i / n_t).powi(2) * (1.0 - cos_i * cos_i);
        if s_t2 >= 1.0 {
            return 1.0;
        }
        let cos_t = (1.0 - s_t2).sqrt();
        let rs = (n_i * cos_i - n_t * cos_t) / (n_i * cos_i + n_t * cos_t);
        let rp = (n_t * cos_i - n_i * cos_t) / (n_t * cos_i + n_i * cos_t);
        0.5 * (rs * rs + rp * rp)
    }

    fn setup(bins: AngleBins, na: f64, nb: f64) -> InterfaceSetup {
        InterfaceSetup {
            bins,
            wavelength_nm: 1000.0,
            above: MediumInfo::new("a", na),
            below: MediumInfo::new("b", nb),
            film_layers: vec![],
        }
    }

    fn bare(na: f64, nb: f64) -> impl Fn(f64, Side) -> InterfaceResponse {
        move |c, side| {
            let (ni, nt) = if side == Side::Above {
                (na, nb)
            } else {
                (nb, na)
            };
            let r = fresnel(c, ni, nt);
            InterfaceResponse::lossless(r, 1.0 - r)
        }
    }

    #[test]
    fn planar_bare_interface_conserves_energy_and_is_reciprocal() {
        let bins = AngleBins::equal_etendue(13, 4, Symmetry::None).unwrap();
        let m = InterfaceMatrices::planar(setup(bins, 1.0, 3.6), bare(1.0, 3.6)).unwrap();
        assert!(m.audit.energy_max_abs < 1e-14, "{:?}", m.audit);
        assert!(
            m.audit.reciprocity_max_abs.unwrap() < 1e-12,
            "{:?}",
            m.audit
        );
        assert!(m.audit.lossless);
    }

    #[test]
    fn planar_average_matches_fine_quadrature() {
        // Bin 0 seen from inside the n = 3.6 medium (s ∈ [0, 0.1]) holds the critical angle
        // (s_c = 1/3.6² ≈ 0.077): mean T over the bin against a 200 000-step midpoint rule.
        let bins = AngleBins::equal_etendue(10, 1, Symmetry::Isotropic).unwrap();
        let m = InterfaceMatrices::planar(setup(bins, 1.0, 3.6), bare(1.0, 3.6)).unwrap();
        let t_sum: f64 = m.from_below.transmission.column_sum(0);
        let k = 200_000;
        let fine: f64 = (0..k)
            .map(|i| {
                let s = 0.1 * (i as f64 + 0.5) / k as f64;
                1.0 - fresnel((1.0 - s).sqrt(), 3.6, 1.0)
            })
            .sum::<f64>()
            / k as f64;
        assert!((t_sum - fine).abs() < 1e-8, "{t_sum} vs {fine}");
    }

    #[test]
    fn lambertian_columns_follow_etendue() {
        let bins =
            AngleBins::from_sin2_edges(&[0.0, 0.2, 0.7, 1.0], 1, Symmetry::Isotropic).unwrap();
        let n = 3.5;
        let m = InterfaceMatrices::lambertian(setup(bins, 1.0, n), move |_, side| match side {
            Side::Above => InterfaceResponse::lossless(0.0, 1.0),
            Side::Below => InterfaceResponse::lossless(1.0 - 1.0 / (n * n), 1.0 / (n * n)),
        })
        .unwrap();
        assert!((m.from_above.transmission.get(1, 0) - 0.5).abs() < 1e-15);
        assert!(m.audit.energy_max_abs < 1e-15);
        assert!(
            m.audit.reciprocity_max_abs.unwrap() < 1e-15,
            "{:?}",
            m.audit
        );
    }

    #[test]
    fn quarter_wave_coating_cancels_reflection_in_the_normal_bin() {
        // n_c = √(n_0 n_s) = 2 on n_s = 4, 75 nm at 600 nm (H. A. Macleod, *Thin-Film Optical
        // Filters*, 4th ed., CRC Press 2010): R = 0 at normal incidence. Normal bin 1e-12 wide.
        use crate::thinfilm::{FilmStack, Layer};
        use num_complex::Complex64;
        let bins =
            AngleBins::from_sin2_edges(&[0.0, 1e-12, 0.5, 1.0], 1, Symmetry::Isotropic).unwrap();
        let films = FilmStack::new(
            Complex64::new(1.0, 0.0),
            vec![Layer::new(Complex64::new(2.0, 0.0), 75.0)],
            Complex64::new(4.0, 0.0),
        )
        .unwrap();
        let mut s = setup(bins, 1.0, 4.0);
        s.wavelength_nm = 600.0;
        s.film_layers = vec!["coating".into()];
        let m = InterfaceMatrices::planar_film(s.clone(), &films).unwrap();
        assert!(
            m.from_above.reflection.get(0, 0) < 1e-12,
            "{}",
            m.from_above.reflection.get(0, 0)
        );
        assert!(
            m.audit.energy_max_abs < 1e-12 && m.audit.reciprocity_max_abs.unwrap() < 1e-10,
            "{:?}",
            m.audit
        );
        s.below.n = 3.9;
        assert!(InterfaceMatrices::planar_film(s, &films).is_err());
    }

    #[test]
    fn merged_planar_matrices_equal_matrices_built_on_the_coarse_bins() {
        // Coarse edges are a subset of the fine ones, so the exact bin-to-bin map of the
        // planar builder (Snell's law, Fresnel averaged over each bin) gives the same numbers
        // either way, up to the quadrature error (10-point Gauss–Legendre over different
        // pieces: a few 1e-12 near the critical angle).
        let mut edges = vec![0.0, 1e-4];
        edges.extend((1..=12).map(|i| i as f64 / 12.0));
        let fine = AngleBins::from_sin2_edges(&edges, 4, Symmetry::None).unwrap();
        for (polar, azimuth) in [(true, false), (false, true)] {
            let coarse = fine.merged_pairs(1, polar, azimuth).unwrap();
            let m =
                InterfaceMatrices::planar(setup(fine.clone(), 1.0, 3.6), bare(1.0, 3.6)).unwrap();
            let direct =
                InterfaceMatrices::planar(setup(coarse.clone(), 1.0, 3.6), bare(1.0, 3.6)).unwrap();
            let merged = m.merged(&coarse).unwrap();
            for (a, b) in [
                (&merged.from_above, &direct.from_above),
                (&merged.from_below, &direct.from_below),
            ] {
                for (x, y) in [
                    (&a.reflection, &b.reflection),
                    (&a.transmission, &b.transmission),
                ] {
                    let d = x
                        .as_slice()
                        .iter()
                        .zip(y.as_slice())
                        .fold(0.0f64, |acc, (u, v)| acc.max((u - v).abs()));
                    assert!(d < 1e-10, "polar {polar}, azimuth {azimuth}: {d:e}");
                }
            }
            assert!(merged.audit.energy_max_abs < 1e-13, "{:?}", merged.audit);
        }
        let other = AngleBins::equal_etendue(5, 1, Symmetry::Isotropic).unwrap();
        let m = InterfaceMatrices::planar(setup(fine, 1.0, 3.6), bare(1.0, 3.6)).unwrap();
        assert!(matches!(m.merged(&other), Err(MatrixError::Setup { .. })));
    }

    #[test]
    fn response_that_loses_energy_is_rejected() {
        let bins = AngleBins::equal_etendue(2, 1, Symmetry::Isotropic).unwrap();
        let e = InterfaceMatrices::planar(setup(bins, 1.0, 1.5), |_, _| {
            InterfaceResponse::lossless(0.1, 0.8)
        });
        assert!(matches!(e, Err(MatrixError::Response { .. })), "{e:?}");
    }
}

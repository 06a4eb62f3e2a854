//! The stack at one wavelength and its matrix solver.
//!
//! # Model
//!
//! A stack is: semi-infinite medium above (incidence), then interfaces and thick incoherent
//! layers alternating (interface, thick, interface, …, interface), then a semi-infinite
//! medium below (air, or a metal that absorbs everything it receives: reported as T). Every
//! interface carries its redistribution matrices ([`InterfaceMatrices`]), all on the same
//! [`AngleBins`]. Thick layers attenuate each bin by its exact bin-averaged Beer–Lambert
//! factor `P_i = ⟨e^{−αd/μ}⟩` ([`super::special::bin_transmission`]), α = 4πk/λ, assuming a
//! uniform radiance within each bin (the matrices' own normalisation). Interface responses
//! seen from inside a weakly absorbing thick layer use the real part of its index; its
//! absorption is taken along the path.
//!
//! # Equations (one linear system, solved exactly)
//!
//! Thick layer l (1 ≤ l ≤ K−1, between interfaces l−1 and l) carries D_l, the down-going bin
//! powers at its top, and U_l, the up-going powers at its bottom. With R_a, T_a (from above)
//! and R_b, T_b (from below) of interface k and P_l = diag(P_l):
//!
//! ```text
//!   D_l = T_a(l−1) P_{l−1} D_{l−1} + R_b(l−1) P_l U_l        (D_0 P_0 ≡ incident vector I)
//!   U_l = R_a(l)   P_l     D_l     + T_b(l)   P_{l+1} U_{l+1} (U_K ≡ 0: nothing comes back
//!                                                              from the medium below)
//! ```
//!
//! This block-tridiagonal system (2(K−1)n unknowns) is the net-radiation / multiple-reflection
//! balance (R. Siegel & J. R. Howell, *Thermal Radiation Heat Transfer*, 4th ed., Taylor &
//! Francis (2002), ch. 17, from memory) in the angular-matrix form of N. Tucher, J. Eisenlohr,
//! P. Kiefel, O. Höhn, H. Hauser, M. Peters, C. Müller, J. C. Goldschmidt & B. Bläsi,
//! "3D optical simulation formalism OPTOS for textured silicon solar cells", Opt. Express 23,
//! A1720 (2015) (from memory). It is solved by exact block Gaussian elimination from the
//! bottom (no truncated series): U_{K−1} = S_{K−1} D_{K−1} with S_{K−1} = R_a(K−1) P_{K−1};
//! then for l = K−2 … 1, G_l = I − R_b(l) P_{l+1} S_{l+1}, H_l = G_l⁻¹ T_a(l) P_l and
//! S_l = R_a(l) P_l + T_b(l) P_{l+1} S_{l+1} H_l; finally G_0 D_1 = T_a(0) I with
//! G_0 = I − R_b(0) P_1 S_1. Each G is factorised by LU with partial pivoting
//! ([`super::linalg`]). Back-substitution: D_{l+1} = H_l D_l, U_l = S_l D_l. The system is
//! restricted beforehand to the bins light can reach (a graph search over the matrices'
//! nonzero pattern): exact, since the other components vanish, and it keeps never-lit
//! lossless bins (total internal reflection in a transparent planar layer) from making the
//! system singular. A lit lossless trap is reported as [`WaferError::Singular`].
//!
//! # Outputs and accounting
//!
//! R = Σ [R_a(0) I + T_b(0) P_1 U_1]; thick layer l absorbs Σ_i (1 − P_{l,i})(D_{l,i} + U_{l,i});
//! film layer m of interface k absorbs `A_a(k)[m]·(P_k D_k) + A_b(k)[m]·(P_{k+1} U_{k+1})`;
//! T = Σ T_a(K−1) P_{K−1} D_{K−1}. Column defects of the matrices (1 − column sum, e.g. Monte
//! Carlo rays lost to numerics) are summed into `unaccounted`, so that
//! R + ΣA + T + unaccounted = 1 holds to round-off (`energy_residual`; tests hold it below
//! 1e-12, the solver fails above [`ACCOUNTING_FAILURE`]).
//! `escape` = R − R_front, where R_front is the reflectance of the stack with everything
//! below the wafer's top interface replaced by a sink (light that never entered the wafer).
//!
//! # Memory
//!
//! The interface matrices take 8 · n² · (4K) bytes, the solver 8 · n² · (2(K−1) + 2) more
//! (S and H per thick layer, one factorisation and one product in flight). The solver refuses
//! stacks whose estimate exceeds [`SolverOptions::memory_budget_bytes`].

use num_complex::Complex64;

use super::WaferError;
use super::linalg::Lu;
use super::special::{bin_rate, bin_transmission};
use crate::redistribution::{AngleBins, InterfaceMatrices, Matrix};

/// A semi-infinite medium (top or bottom of the stack).
#[derive(Clone, Debug, PartialEq)]
pub struct SemiInfinite {
    pub id: String,
    /// n + ik at the stack's wavelength, k ≥ 0.
    pub index: Complex64,
}

/// A thick incoherent layer (wafer, glass, encapsulant).
#[derive(Clone, Debug, PartialEq)]
pub struct ThickLayer {
    pub id: String,
    /// n + ik at the stack's wavelength, k ≥ 0.
    pub index: Complex64,
    /// Thickness, µm (> 0), measured between the interfaces' base planes.
    pub thickness_um: f64,
}

impl ThickLayer {
    /// Absorption coefficient α = 4πk/λ, cm⁻¹.
    pub fn alpha_per_cm(&self, wavelength_nm: f64) -> f64 {
        super::limits::alpha_per_cm(self.index.im, wavelength_nm)
    }
    /// Optical thickness τ = α d (dimensionless).
    pub fn optical_thickness(&self, wavelength_nm: f64) -> f64 {
        4.0 * std::f64::consts::PI * self.index.im * (self.thickness_um * 1e3) / wavelength_nm
    }
}

/// One element of the ordered stack description given to [`Stack::new`].
#[derive(Clone, Debug)]
pub enum StackElement {
    Medium(SemiInfinite),
    Interface(Box<InterfaceMatrices>),
    Thick(ThickLayer),
}

/// Solver settings.
#[derive(Clone, Debug, PartialEq)]
pub struct SolverOptions {
    /// Largest memory the dense matrices may take (interfaces + solver), bytes. Default 4 GiB.
    pub memory_budget_bytes: usize,
}

impl Default for SolverOptions {
    fn default() -> Self {
        SolverOptions {
            memory_budget_bytes: 4 << 30,
        }
    }
}

/// A validated stack at one wavelength.
#[derive(Clone, Debug)]
pub struct Stack {
    wavelength_nm: f64,
    top: SemiInfinite,
    interfaces: Vec<InterfaceMatrices>,
    layers: Vec<ThickLayer>,
    bottom: SemiInfinite,
    wafer: usize,
}

/// Bin powers inside one thick layer, for the generation profile.
#[derive(Clone, Debug, PartialEq)]
pub struct LayerFluxes {
    pub id: String,
    pub alpha_per_cm: f64,
    pub thickness_um: f64,
    /// Down-going power per bin at the top of the layer (fractions of the incident power).
    pub down_top: Vec<f64>,
    /// Up-going power per bin at the bottom of the layer.
    pub up_bottom: Vec<f64>,
}

/// Solver output at one wavelength; every power is a fraction of the incident power.
#[derive(Clone, Debug, PartialEq)]
pub struct StackResult {
    pub wavelength_nm: f64,
    /// Total reflectance (into the medium above).
    pub reflectance: f64,
    /// Reflected power per up-going bin of the medium above.
    pub reflectance_bins: Vec<f64>,
    /// Reflected without ever entering the wafer layer.
    pub reflectance_front: f64,
    /// Entered the wafer layer and left again into the medium above: `reflectance − reflectance_front`.
    pub escape: f64,
    /// Into the medium below (absorbed there if it is a metal).
    pub transmittance: f64,
    pub transmittance_bins: Vec<f64>,
    /// Absorptance of each thick layer, top to bottom.
    pub thick_absorptance: Vec<f64>,
    /// Absorptance of each film layer of each interface (outer: interfaces top to bottom).
    pub film_absorptance: Vec<Vec<f64>>,
    /// Power not accounted by the matrices (1 − column sums: Monte Carlo losses).
    pub unaccounted: f64,
    /// |1 − (R + ΣA + T + unaccounted)|: round-off of the solve.
    pub energy_residual: f64,
    /// Index (into the thick layers) of the wafer.
    pub wafer_layer: usize,
    pub layers: Vec<LayerFluxes>,
    pub bins: AngleBins,
}

impl Stack {
    /// Validates an ordered stack description (see the module doc for the order).
    pub fn new(wavelength_nm: f64, elements: Vec<StackElement>) -> Result<Stack, WaferError> {
        let bad = |position: usize, problem: String, fix: &str| WaferError::Stack {
            position,
            problem,
            fix: fix.into(),
        };
        if !(wavelength_nm.is_finite() && wavelength_nm > 0.0) {
            return Err(bad(
                0,
                format!("wavelength {wavelength_nm} nm"),
                "give a positive wavelength in nm",
            ));
        }
        let count = elements.len();
        if count < 3 {
            return Err(bad(
                0,
                format!("{count} element(s)"),
                "a stack needs at least: medium above, one interface, medium below",
            ));
        }
        let mut top = None;
        let mut bottom = None;
        let mut interfaces = Vec::new();
        let mut layers = Vec::new();
        let mut prev_interface: Option<bool> = None; // Some(true) after an interface
        for (pos, el) in elements.into_iter().enumerate() {
            match el {
                StackElement::Medium(m) => {
                    check_index(pos, &m.id, m.index)?;
                    if pos == 0 {
                        if m.index.im > 0.0 {
                            return Err(bad(
                                pos,
                                format!(
                                    "incidence medium `{}` absorbs (k = {:e})",
                                    m.id, m.index.im
                                ),
                                "light must arrive through a non-absorbing medium; put an absorbing cover in as a thick layer",
                            ));
                        }
                        top = Some(m);
                    } else if pos == count - 1 {
                        if prev_interface != Some(true) {
                            return Err(bad(
                                pos,
                                "the medium below follows a thick layer".into(),
                                "put an interface before the medium below",
                            ));
                        }
                        bottom = Some(m);
                    } else {
                        return Err(bad(
                            pos,
                            format!("semi-infinite medium `{}` in the middle of the stack", m.id),
                            "semi-infinite media go first and last only; use a thick layer with a thickness",
                        ));
                    }
                }
                StackElement::Interface(i) => {
                    if pos == 0 || pos == count - 1 {
                        return Err(bad(
                            pos,
                            "the stack starts or ends with an interface".into(),
                            "start and end with a semi-infinite medium",
                        ));
                    }
                    if prev_interface == Some(true) {
                        return Err(bad(
                            pos,
                            "two interfaces with no thick layer between".into(),
                            "merge them into one interface (thin films belong inside an interface's film stack)",
                        ));
                    }
                    interfaces.push(*i);
                    prev_interface = Some(true);
                }
                StackElement::Thick(t) => {
                    if pos == 0 || pos == count - 1 {
                        return Err(bad(
                            pos,
                            format!("thick layer `{}` at an end of the stack", t.id),
                            "start and end with a semi-infinite medium",
                        ));
                    }
                    if prev_interface != Some(true) {
                        return Err(bad(
                            pos,
                            format!("thick layer `{}` without an interface before it", t.id),
                            "put an interface (planar or textured) between two thick layers and after the medium above",
                        ));
                    }
                    check_index(pos, &t.id, t.index)?;
                    if !(t.thickness_um.is_finite() && t.thickness_um > 0.0) {
                        return Err(bad(
                            pos,
                            format!("thick layer `{}` has thickness {} µm", t.id, t.thickness_um),
                            "give a positive thickness in µm",
                        ));
                    }
                    layers.push(t);
                    prev_interface = Some(false);
                }
            }
        }
        let top = top.ok_or_else(|| {
            bad(
                0,
                "no semi-infinite medium above".into(),
                "start with the incidence medium",
            )
        })?;
        let bottom = bottom.ok_or_else(|| {
            bad(
                count - 1,
                "no semi-infinite medium below".into(),
                "end with a semi-infinite medium",
            )
        })?;
        // Interfaces must agree with each other and with their neighbours.
        let bins = interfaces[0].setup.bins.clone();
        let n_of = |k: usize| -> (f64, String) {
            if k == 0 {
                (top.index.re, top.id.clone())
            } else {
                (layers[k - 1].index.re, layers[k - 1].id.clone())
            }
        };
        for (k, itf) in interfaces.iter().enumerate() {
            let pos = 1 + 2 * k;
            if itf.setup.bins != bins {
                return Err(bad(
                    pos,
                    format!("interface {k} uses other angle bins than interface 0"),
                    "build every interface's matrices on the same AngleBins",
                ));
            }
            if (itf.setup.wavelength_nm - wavelength_nm).abs() > 1e-9 * wavelength_nm {
                return Err(bad(
                    pos,
                    format!(
                        "interface {k} is for {} nm, the stack for {wavelength_nm} nm",
                        itf.setup.wavelength_nm
                    ),
                    "build the interface matrices at the stack's wavelength",
                ));
            }
            let (na, ida) = n_of(k);
            let (nb, idb) = if k + 1 < interfaces.len() {
                n_of(k + 1)
            } else {
                (bottom.index.re, bottom.id.clone())
            };
            for (side, n_itf, n_med, id) in [
                ("above", itf.setup.above.n, na, ida),
                ("below", itf.setup.below.n, nb, idb),
            ] {
                if (n_itf - n_med).abs() > 1e-6 * n_med.abs().max(1.0) {
                    return Err(bad(
                        pos,
                        format!(
                            "interface {k} assumes n = {n_itf} {side}, but `{id}` has n = {n_med} at {wavelength_nm} nm"
                        ),
                        "build the interface matrices with the real index of the neighbouring media",
                    ));
                }
            }
        }
        let wafer = layers.iter().position(|l| l.index.im > 0.0).unwrap_or(0);
        Ok(Stack {
            wavelength_nm,
            top,
            interfaces,
            layers,
            bottom,
            wafer,
        })
    }

    /// Chooses which thick layer is the wafer (for `escape` and `reflectance_front`); the
    /// default is the first absorbing thick layer (else the first). A slightly absorbing
    /// cover (glass, encapsulant) above the wafer counts as absorbing: set the wafer
    /// explicitly for such stacks.
    pub fn with_wafer_layer(mut self, layer: usize) -> Result<Self, WaferError> {
        if layer >= self.layers.len() {
            return Err(WaferError::Stack {
                position: 0,
                problem: format!(
                    "wafer layer {layer} requested, the stack has {} thick layer(s)",
                    self.layers.len()
                ),
                fix: "count thick layers from 0, top to bottom".into(),
            });
        }
        self.wafer = layer;
        Ok(self)
    }

    pub fn wavelength_nm(&self) -> f64 {
        self.wavelength_nm
    }
    pub fn bins(&self) -> &AngleBins {
        &self.interfaces[0].setup.bins
    }
    pub fn interfaces(&self) -> &[InterfaceMatrices] {
        &self.interfaces
    }
    pub fn thick_layers(&self) -> &[ThickLayer] {
        &self.layers
    }
    pub fn top(&self) -> &SemiInfinite {
        &self.top
    }
    pub fn bottom(&self) -> &SemiInfinite {
        &self.bottom
    }
    pub fn wafer_layer(&self) -> usize {
        self.wafer
    }

    /// Estimated bytes of dense matrices for a solve (interfaces + solver workspace).
    pub fn memory_estimate_bytes(&self) -> usize {
        memory_estimate_bytes(self.bins().len(), self.interfaces.len())
    }

    /// Bin-averaged transmission P_l of each thick layer (length n each).
    pub fn attenuation(&self) -> Vec<Vec<f64>> {
        let bins = self.bins();
        self.layers
            .iter()
            .map(|l| {
                let tau = l.optical_thickness(self.wavelength_nm);
                (0..bins.len())
                    .map(|i| {
                        let (mu0, mu1) = bins.cos_range(bins.split(i).0);
                        bin_transmission(tau, mu0, mu1)
                    })
                    .collect()
            })
            .collect()
    }

    /// Solves the stack for `incident` power per down-going bin of the medium above (any
    /// non-negative vector with a positive sum; results are fractions of its sum).
    pub fn solve(
        &self,
        incident: &[f64],
        options: &SolverOptions,
    ) -> Result<StackResult, WaferError> {
        let n = self.bins().len();
        let total: f64 = incident.iter().sum();
        if incident.len() != n
            || incident.iter().any(|x| !(x.is_finite() && *x >= 0.0))
            || total <= 0.0
            || total.is_nan()
        {
            return Err(WaferError::Incidence {
                problem: format!("{} values, sum {total}", incident.len()),
                expected: format!(
                    "{n} non-negative finite powers (one per bin) with a positive sum"
                ),
            });
        }
        let estimate = self.memory_estimate_bytes();
        if estimate > options.memory_budget_bytes {
            return Err(WaferError::TooManyBins {
                bins: n,
                interfaces: self.interfaces.len(),
                estimate_bytes: estimate,
                budget_bytes: options.memory_budget_bytes,
            });
        }
        let inc: Vec<f64> = incident.iter().map(|x| x / total).collect();
        let p = self.attenuation();
        let k_count = self.interfaces.len();
        let chain = self.eliminate(k_count - 1, &inc, &p)?;
        // Reflectance of light that never entered the wafer: the chain cut at its top
        // interface (interface index = wafer layer index), which becomes a sink.
        let front_chain = self.eliminate(self.wafer, &inc, &p)?;
        let r_front_vec = self.reflected(&inc, &p, &front_chain);
        let r_vec = self.reflected(&inc, &p, &chain);
        // Powers arriving at each interface from above (P D) and from below (P U).
        let mut from_above_at = vec![inc.clone()];
        let mut from_below_at = Vec::with_capacity(k_count);
        for l in 1..k_count {
            from_above_at.push(hadamard(&p[l - 1], &chain.down[l - 1]));
            from_below_at.push(hadamard(&p[l - 1], &chain.up[l - 1]));
        }
        from_below_at.push(vec![0.0; n]);
        let mut film = Vec::with_capacity(k_count);
        let mut unaccounted = 0.0;
        for (k, itf) in self.interfaces.iter().enumerate() {
            let (da, ub) = (&from_above_at[k], &from_below_at[k]);
            let a = itf.from_above.absorption.mul_vec(da);
            let b = itf.from_below.absorption.mul_vec(ub);
            film.push(a.iter().zip(&b).map(|(x, y)| x + y).collect::<Vec<f64>>());
            let (ca, cb) = (
                itf.from_above.column_totals(),
                itf.from_below.column_totals(),
            );
            for j in 0..n {
                unaccounted += (1.0 - ca[j]) * da[j] + (1.0 - cb[j]) * ub[j];
            }
        }
        let thick: Vec<f64> = (0..k_count - 1)
            .map(|l| {
                (0..n)
                    .map(|i| (1.0 - p[l][i]) * (chain.down[l][i] + chain.up[l][i]))
                    .sum()
            })
            .collect();
        let t_vec = self.interfaces[k_count - 1]
            .from_above
            .transmission
            .mul_vec(&from_above_at[k_count - 1]);
        let (r, rf, t) = (sum(&r_vec), sum(&r_front_vec), sum(&t_vec));
        let absorbed: f64 = thick.iter().sum::<f64>() + film.iter().flatten().sum::<f64>();
        let residual = (1.0 - (r + absorbed + t + unaccounted)).abs();
        // A bug detector, not the accuracy claim (tests hold the residual below 1e-12).
        if residual >= ACCOUNTING_FAILURE || residual.is_nan() {
            return Err(WaferError::Accounting {
                wavelength_nm: self.wavelength_nm,
                residual,
            });
        }
        let layers = self
            .layers
            .iter()
            .enumerate()
            .map(|(l, t)| LayerFluxes {
                id: t.id.clone(),
                alpha_per_cm: t.alpha_per_cm(self.wavelength_nm),
                thickness_um: t.thickness_um,
                down_top: chain.down[l].clone(),
                up_bottom: chain.up[l].clone(),
            })
            .collect();
        Ok(StackResult {
            wavelength_nm: self.wavelength_nm,
            reflectance: r,
            reflectance_bins: r_vec,
            reflectance_front: rf,
            escape: r - rf,
            transmittance: t,
            transmittance_bins: t_vec,
            thick_absorptance: thick,
            film_absorptance: film,
            unaccounted,
            energy_residual: residual,
            wafer_layer: self.wafer,
            layers,
            bins: self.bins().clone(),
        })
    }

    /// R vector of a solved chain: R_a(0) I + T_b(0) P_1 U_1.
    fn reflected(&self, inc: &[f64], p: &[Vec<f64>], c: &Chain) -> Vec<f64> {
        let mut r = self.interfaces[0].from_above.reflection.mul_vec(inc);
        if let Some(u1) = c.up.first() {
            let back = self.interfaces[0]
                .from_below
                .transmission
                .mul_vec(&hadamard(&p[0], u1));
            r.iter_mut().zip(back).for_each(|(a, b)| *a += b);
        }
        r
    }

    /// Bins of D_l and U_l (l = 1..=last, index l−1) that light from `inc` can reach, by a
    /// breadth-first search over the nonzero pattern of the one-bounce operator. Components
    /// outside are exactly zero, so solving on the reachable bins only is exact; it also keeps
    /// never-lit lossless bins (e.g. total internal reflection between a planar front and a
    /// mirror in a transparent layer) out of the system, where they would make it singular.
    fn reachable(
        &self,
        last: usize,
        inc: &[f64],
        p: &[Vec<f64>],
    ) -> (Vec<Vec<usize>>, Vec<Vec<usize>>) {
        let n = inc.len();
        let mut seen_d = vec![vec![false; n]; last];
        let mut seen_u = vec![vec![false; n]; last];
        // Work list of (layer index l−1, is_up, bin).
        let mut work: Vec<(usize, bool, usize)> = Vec::new();
        let t0 = self.interfaces[0].from_above.transmission.mul_vec(inc);
        for (i, v) in t0.iter().enumerate() {
            if *v != 0.0 {
                seen_d[0][i] = true;
                work.push((0, false, i));
            }
        }
        let push = |seen: &mut [Vec<bool>],
                    work: &mut Vec<(usize, bool, usize)>,
                    l: usize,
                    up: bool,
                    m: &Matrix,
                    j: usize| {
            for (i, s) in seen[l].iter_mut().enumerate() {
                if !*s && m.get(i, j) != 0.0 {
                    *s = true;
                    work.push((l, up, i));
                }
            }
        };
        while let Some((l, up, j)) = work.pop() {
            if p[l][j] == 0.0 {
                continue; // absorbed on the way through the layer
            }
            if !up {
                // D_{l+1} (1-based) arrives at interface l+1 from above.
                let itf = &self.interfaces[l + 1];
                push(
                    &mut seen_u,
                    &mut work,
                    l,
                    true,
                    &itf.from_above.reflection,
                    j,
                );
                if l + 1 < last {
                    push(
                        &mut seen_d,
                        &mut work,
                        l + 1,
                        false,
                        &itf.from_above.transmission,
                        j,
                    );
                }
            } else {
                // U_{l+1} arrives at interface l from below.
                let itf = &self.interfaces[l];
                push(
                    &mut seen_d,
                    &mut work,
                    l,
                    false,
                    &itf.from_below.reflection,
                    j,
                );
                if l > 0 {
                    push(
                        &mut seen_u,
                        &mut work,
                        l - 1,
                        true,
                        &itf.from_below.transmission,
                        j,
                    );
                }
            }
        }
        let list = |v: Vec<Vec<bool>>| -> Vec<Vec<usize>> {
            v.into_iter()
                .map(|b| (0..n).filter(|i| b[*i]).collect())
                .collect()
        };
        (list(seen_d), list(seen_u))
    }

    /// Solves interfaces 0..=last with thick layers 1..=last (everything transmitted down
    /// through interface `last` leaves: a sink). Returns D_l, U_l for l = 1..=last, on the
    /// reachable bins only ([`Self::reachable`]), scattered back to full length.
    fn eliminate(&self, last: usize, inc: &[f64], p: &[Vec<f64>]) -> Result<Chain, WaferError> {
        let n = inc.len();
        if last == 0 {
            return Ok(Chain {
                down: vec![],
                up: vec![],
            });
        }
        let singular = |e: super::linalg::Singular, k: usize| WaferError::Singular {
            wavelength_nm: self.wavelength_nm,
            interface: k,
            column: e.column,
        };
        let (rd, ru) = self.reachable(last, inc, p);
        let pick = |v: &[f64], idx: &[usize]| -> Vec<f64> { idx.iter().map(|&i| v[i]).collect() };
        // S_l for l = last … 1 (index l−1), H_l for l = last−1 … 1 (index l).
        let mut s: Vec<Option<Matrix>> = vec![None; last];
        let mut h: Vec<Option<Matrix>> = vec![None; last];
        let mut s_last = sub(
            &self.interfaces[last].from_above.reflection,
            &ru[last - 1],
            &rd[last - 1],
        );
        s_last.scale_columns(&pick(&p[last - 1], &rd[last - 1]));
        s[last - 1] = Some(s_last);
        for l in (1..last).rev() {
            let itf = &self.interfaces[l];
            let (d_here, u_here, d_next, u_next) = (&rd[l - 1], &ru[l - 1], &rd[l], &ru[l]);
            // M = P_{l+1} S_{l+1}
            let mut m = s[l].clone().expect("set in previous step");
            m.scale_rows(&pick(&p[l], u_next));
            let g = identity_minus(sub(&itf.from_below.reflection, d_next, u_next).matmul(&m));
            let lu = Lu::factor(g).map_err(|e| singular(e, l))?;
            let p_here = pick(&p[l - 1], d_here);
            let mut rhs = sub(&itf.from_above.transmission, d_next, d_here);
            rhs.scale_columns(&p_here);
            let hl = lu.solve_matrix(&rhs);
            let mut sl = sub(&itf.from_above.reflection, u_here, d_here);
            sl.scale_columns(&p_here);
            let back = sub(&itf.from_below.transmission, u_here, u_next).matmul(&m.matmul(&hl));
            sl.as_mut_slice()
                .iter_mut()
                .zip(back.as_slice())
                .for_each(|(a, b)| *a += b);
            s[l - 1] = Some(sl);
            h[l] = Some(hl);
        }
        // Top: G_0 D_1 = T_a(0) I.
        let itf = &self.interfaces[0];
        let mut m = s[0].clone().expect("S_1");
        m.scale_rows(&pick(&p[0], &ru[0]));
        let g0 = identity_minus(sub(&itf.from_below.reflection, &rd[0], &ru[0]).matmul(&m));
        let lu = Lu::factor(g0).map_err(|e| singular(e, 0))?;
        let t0 = itf.from_above.transmission.mul_vec(inc);
        let d1 = lu.solve(&pick(&t0, &rd[0]));
        let mut down_r = vec![d1];
        for l in 1..last {
            let next = h[l].as_ref().expect("H_l").mul_vec(&down_r[l - 1]);
            down_r.push(next);
        }
        let scatter = |v: &[f64], idx: &[usize]| -> Vec<f64> {
            let mut out = vec![0.0; n];
            idx.iter().zip(v).for_each(|(&i, x)| out[i] = *x);
            out
        };
        let down: Vec<Vec<f64>> = (0..last).map(|l| scatter(&down_r[l], &rd[l])).collect();
        let up: Vec<Vec<f64>> = (0..last)
            .map(|l| scatter(&s[l].as_ref().expect("S").mul_vec(&down_r[l]), &ru[l]))
            .collect();
        Ok(Chain { down, up })
    }
}

/// Submatrix m[rows, cols].
fn sub(m: &Matrix, rows: &[usize], cols: &[usize]) -> Matrix {
    let mut data = Vec::with_capacity(rows.len() * cols.len());
    for &i in rows {
        let r = m.row(i);
        data.extend(cols.iter().map(|&j| r[j]));
    }
    Matrix::from_row_major(rows.len(), cols.len(), data).expect("shape")
}

/// Residual of R + ΣA + T + unaccounted = 1 beyond which a solve is reported as failed
/// (round-off of a backward-stable solve is ≈ n ε ‖D‖₁, far below this).
pub const ACCOUNTING_FAILURE: f64 = 1e-9;

/// D_l (down at the top) and U_l (up at the bottom) of thick layers 1..=last (index l−1).
#[derive(Debug)]
struct Chain {
    down: Vec<Vec<f64>>,
    up: Vec<Vec<f64>>,
}

/// Bytes of dense matrices for n bins and K interfaces: 4K (interfaces) + 2(K−1) (S, H)
/// + 2 (a factorisation and a product in flight) matrices of n² f64.
pub fn memory_estimate_bytes(n_bins: usize, n_interfaces: usize) -> usize {
    let per = n_bins.saturating_mul(n_bins).saturating_mul(8);
    per.saturating_mul(4 * n_interfaces + 2 * n_interfaces.saturating_sub(1) + 2)
}

fn check_index(position: usize, id: &str, n: Complex64) -> Result<(), WaferError> {
    if !(n.re.is_finite() && n.im.is_finite() && n.re > 0.0 && n.im >= 0.0) {
        return Err(WaferError::Stack {
            position,
            problem: format!("`{id}` has index {} + {}i", n.re, n.im),
            fix: "use n > 0 and k ≥ 0 (convention n + ik, k ≥ 0 absorbs)".into(),
        });
    }
    Ok(())
}

fn identity_minus(mut m: Matrix) -> Matrix {
    let n = m.rows();
    m.as_mut_slice().iter_mut().for_each(|x| *x = -*x);
    for i in 0..n {
        m.add_at(i, i, 1.0);
    }
    m
}

fn hadamard(a: &[f64], b: &[f64]) -> Vec<f64> {
    a.iter().zip(b).map(|(x, y)| x * y).collect()
}

fn sum(v: &[f64]) -> f64 {
    v.iter().sum()
}

impl StackResult {
    /// Absorptance of the wafer layer.
    pub fn wafer_absorptance(&self) -> f64 {
        self.thick_absorptance[self.wafer_layer]
    }

    /// Path-length enhancement of the wafer, see [`super::limits::path_length_enhancement`].
    pub fn path_length_enhancement(&self) -> Option<f64> {
        let l = &self.layers[self.wafer_layer];
        super::limits::path_length_enhancement(
            self.wafer_absorptance(),
            self.reflectance_front,
            l.alpha_per_cm,
            l.thickness_um,
        )
    }

    /// Fraction of the incident power absorbed in each depth slab [z_k, z_{k+1}] of thick
    /// layer `layer` (`edges_um` increasing, within 0 … thickness), exactly: a bin entering
    /// at the top with power D keeps D⟨e^{−αz/μ}⟩ at depth z
    /// ([`super::special::bin_transmission`]), so the slab absorbs
    /// D (⟨e^{−αz_k/μ}⟩ − ⟨e^{−αz_{k+1}/μ}⟩), and likewise for the up-going power from the
    /// bottom. Over edges 0 … thickness the slabs add up to the layer's absorptance (to
    /// round-off). Bins are grouped by polar bin first (the attenuation does not depend on
    /// azimuth). `None` for an unknown layer or edges outside the layer.
    pub fn absorbed_in_slabs(&self, layer: usize, edges_um: &[f64]) -> Option<Vec<f64>> {
        let l = self.layers.get(layer)?;
        let w = l.thickness_um;
        let tol = 1e-9 * w;
        if edges_um.len() < 2
            || edges_um.iter().any(|z| !(-tol..=w + tol).contains(z))
            || edges_um.windows(2).any(|e| e[1] < e[0])
        {
            return None;
        }
        let alpha_per_um = l.alpha_per_cm * 1e-4;
        let na = self.bins.n_azimuth();
        let mut out = vec![0.0; edges_um.len() - 1];
        for p in 0..self.bins.n_polar() {
            let d: f64 = l.down_top[p * na..(p + 1) * na].iter().sum();
            let u: f64 = l.up_bottom[p * na..(p + 1) * na].iter().sum();
            if d == 0.0 && u == 0.0 {
                continue;
            }
            let (mu0, mu1) = self.bins.cos_range(p);
            let kept = |z: f64| bin_transmission(alpha_per_um * z.clamp(0.0, w), mu0, mu1);
            let (mut down_prev, mut up_prev) = (kept(edges_um[0]), kept(w - edges_um[0]));
            for (k, z) in edges_um[1..].iter().enumerate() {
                let (down, up) = (kept(*z), kept(w - z));
                out[k] += d * (down_prev - down) + u * (up - up_prev);
                (down_prev, up_prev) = (down, up);
            }
        }
        Some(out)
    }

    /// Photogeneration rate at depth `depth_um` (from the layer's top, 0 … thickness) in
    /// thick layer `layer`, for a photon flux `photon_flux_cm2_s` (photons cm⁻² s⁻¹) of this
    /// wavelength incident on the stack: cm⁻³ s⁻¹. Every bin contributes exactly (uniform
    /// radiance within the bin):
    /// G(z) = Φ α Σ_i [D_i ⟨e^{−αz/μ}/μ⟩_i + U_i ⟨e^{−α(W−z)/μ}/μ⟩_i]
    /// with the bin averages in closed form ([`super::special::bin_rate`], E₂ functions).
    /// ∫₀^W G dz = Φ × (this layer's absorptance). Returns `None` for an unknown layer or a
    /// depth outside the layer.
    pub fn generation_cm3_s(
        &self,
        layer: usize,
        depth_um: f64,
        photon_flux_cm2_s: f64,
    ) -> Option<f64> {
        let l = self.layers.get(layer)?;
        if !(0.0..=l.thickness_um).contains(&depth_um) {
            return None;
        }
        let alpha_per_um = l.alpha_per_cm * 1e-4;
        let (tz, tb) = (
            alpha_per_um * depth_um,
            alpha_per_um * (l.thickness_um - depth_um),
        );
        let mut g = 0.0;
        for i in 0..self.bins.len() {
            let (d, u) = (l.down_top[i], l.up_bottom[i]);
            if d == 0.0 && u == 0.0 {
                continue;
            }
            let (mu0, mu1) = self.bins.cos_range(self.bins.split(i).0);
            g += d * bin_rate(tz, mu0, mu1) + u * bin_rate(tb, mu0, mu1);
        }
        Some(photon_flux_cm2_s * l.alpha_per_cm * g)
    }
}

#[cfg(test)]
mod slab_tests {
    use crate::redistribution::{AngleBins, InterfaceMatrices, InterfaceResponse, InterfaceSetup};
    use crate::redistribution::{MediumInfo, Side};
    use crate::texture::Symmetry;
    use crate::wafer::{SemiInfinite, SolverOptions, Stack, StackElement, ThickLayer};
    use num_complex::Complex64;

    /// Slab absorption adds up to the layer's absorptance and agrees with the integral of
    /// the generation rate G(z) (midpoint rule on a fine grid); the first slab of a bare
    /// slab under normal light absorbs 1 − e^{−αz₁} of what entered (Beer–Lambert).
    #[test]
    fn slabs_add_up_and_match_the_generation_rate() {
        let b =
            AngleBins::from_sin2_edges(&[0.0, 1e-12, 0.25, 0.5, 1.0], 2, Symmetry::None).unwrap();
        let setup = |na: f64, nb: f64| InterfaceSetup {
            bins: b.clone(),
            wavelength_nm: 1000.0,
            above: MediumInfo::new("a", na),
            below: MediumInfo::new("b", nb),
            film_layers: vec![],
        };
        let clear = |_: f64, _: Side| InterfaceResponse::lossless(0.0, 1.0);
        let half = |_: f64, _: Side| InterfaceResponse::lossless(0.5, 0.5);
        let k = 1e-3; // α = 4πk/λ ≈ 126 cm⁻¹
        let stack = Stack::new(
            1000.0,
            vec![
                StackElement::Medium(SemiInfinite {
                    id: "air".into(),
                    index: Complex64::new(1.0, 0.0),
                }),
                StackElement::Interface(Box::new(
                    InterfaceMatrices::planar(setup(1.0, 1.0), clear).unwrap(),
                )),
                StackElement::Thick(ThickLayer {
                    id: "x".into(),
                    index: Complex64::new(1.0, k),
                    thickness_um: 100.0,
                }),
                StackElement::Interface(Box::new(
                    InterfaceMatrices::lambertian(setup(1.0, 1.0), half).unwrap(),
                )),
                StackElement::Medium(SemiInfinite {
                    id: "air".into(),
                    index: Complex64::new(1.0, 0.0),
                }),
            ],
        )
        .unwrap();
        let mut inc = vec![0.0; b.len()];
        inc[0] = 1.0;
        let r = stack.solve(&inc, &SolverOptions::default()).unwrap();
        let edges: Vec<f64> = (0..=10).map(|i| 10.0 * i as f64).collect();
        let slabs = r.absorbed_in_slabs(0, &edges).unwrap();
        let total: f64 = slabs.iter().sum();
        assert!((total - r.thick_absorptance[0]).abs() < 1e-14, "{total}");
        for (k, s) in slabs.iter().enumerate() {
            let m = 2000;
            let dz = 10.0 / m as f64;
            let g: f64 = (0..m)
                .map(|i| {
                    let z = edges[k] + (i as f64 + 0.5) * dz;
                    r.generation_cm3_s(0, z, 1.0).unwrap() * dz * 1e-4
                })
                .sum();
            assert!((g - s).abs() < 1e-6 * s, "slab {k}: {s} vs ∫G = {g}");
        }
        // First slab: the normal beam (power 1) loses 1 − e^{−α·10 µm}, plus what the diffuse
        // light coming back up deposits there (positive).
        let alpha_per_um = 4.0 * std::f64::consts::PI * k / 1.0;
        let beer = 1.0 - (-alpha_per_um * 10.0).exp();
        assert!(
            slabs[0] > beer && slabs[0] < beer * 1.2,
            "{} vs {beer}",
            slabs[0]
        );
        assert!(r.absorbed_in_slabs(0, &[0.0, 200.0]).is_none());
    }
}

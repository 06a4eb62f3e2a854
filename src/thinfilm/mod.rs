//! Coherent thin-film stacks on one facet, at one wavelength and angle, in the facet frame:
//! complex r and t for s and p, reflectance R, transmittance T and the absorptance of every
//! layer, for incidence from either side, at any angle (total internal reflection and
//! evanescent layers included); and [`AngleTable`]s that tabulate all of it against the
//! incidence angle for the tracer's hot path.
//!
//! Invariant: R + T + ΣA = 1 within 1e-12 for every stack and angle; a lossless stack gives
//! ΣA = 0 to round-off. Not here: incoherent thick layers (wafer, glass: `wafer`), rays in
//! the wafer frame (`tracer`), material data (`optics::materials`).
//!
//! # Method
//!
//! The transfer-matrix method for a stratified medium (M. Born & E. Wolf, *Principles of
//! Optics*, 7th ed., Cambridge Univ. Press 1999, §1.6; H. A. Macleod, *Thin-Film Optical
//! Filters*, 4th ed., CRC Press 2010, ch. 2), in the amplitude conventions, branch choices
//! and Poynting-flux bookkeeping of S. J. Byrnes, "Multilayer optical calculations",
//! arXiv:1603.02720 (2016). The 2×2 matrix product is evaluated in its equivalent recursive
//! (Airy/Rouard) form, bottom up for the effective reflection coefficient of each sub-stack
//! and top down for the amplitudes, so that only the decaying factor exp(iδ), |exp(iδ)| ≤ 1,
//! ever appears: thick absorbing or evanescent layers underflow to zero instead of
//! overflowing, at any thickness (no clamping of the phase is needed).
//!
//! # Conventions
//!
//! * Index N = n + ik, k ≥ 0; time dependence exp(−iωt); the forward wave in every medium
//!   has Im(N cos θ) ≥ 0 (decaying), and Re(N cos θ) > 0 when it does not decay.
//! * The incident half-space is taken as **real**, `Re(N)`: a ray inside a weakly absorbing
//!   thick medium (the wafer) loses power along its path, which the caller books with
//!   Beer–Lambert; the interface response uses the real part (DESIGN.md §4).
//! * The exit half-space may absorb (a metal): T is then the power that enters it, which
//!   the caller books as absorbed there.
//! * Fresnel amplitudes as in Byrnes (2016): r_s = (q_i − q_f)/(q_i + q_f) with q = N cos θ,
//!   r_p = (N_f² q_i − N_i² q_f)/(N_f² q_i + N_i² q_f); t for the full E-field amplitude. At
//!   normal incidence r_p = −r_s: fields are referred to a right-handed (s, p, k) frame for
//!   every beam, so a mirror reverses circular handedness (M₃₃ = M₄₄ = −R).

mod stack;
pub mod table;

pub use stack::{Amplitudes, FilmError, FilmResponse, FilmStack, Layer, Side};
pub use table::{AngleTable, CrossTerms, FullSample, PowerCoefficients};

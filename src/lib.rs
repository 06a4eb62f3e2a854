//! # lightfold
//!
//! Monte Carlo ray tracing of light trapping in textured, coated silicon wafers.
//!
//! The pipeline reads like the physics:
//!
//! ```text
//! scenario ─► materials (n, k) ─► thin-film stacks ─► interface angle tables
//!          ─► textures ─► surface tracer ─► redistribution matrices ─► wafer solver ─► report
//! ```
//!
//! * [`spectrum`]: wavelength grids, ASTM G173-03 spectra, photon flux, photocurrent.
//! * [`optics`]: complex index, Snell, Fresnel, Stokes/Mueller; [`optics::materials`].
//! * [`thinfilm`]: coherent stacks by the transfer-matrix method; angle tables.
//! * [`geometry`]: vectors, rays, robust facet intersection.
//! * [`texture`]: periodic surface geometries behind one trait.
//! * [`sampling`]: deterministic random streams per work chunk.
//! * [`tracer`]: rays through one textured interface or through the whole wafer.
//! * [`redistribution`]: angular bins and redistribution matrices.
//! * [`wafer`]: the stack solver, limits, photocurrent and generation profile.
//! * [`scenario`]: TOML input → validated scenario; every input error lives there.
//! * [`report`]: writers for text, JSON, CSV; they compute no physics.
//!
//! Results are engineering estimates; product ratings need certified measurement.

pub mod geometry;
pub mod optics;
pub mod redistribution;
pub mod report;
pub mod sampling;
pub mod scenario;
pub mod simulate;
pub mod spectrum;
pub mod texture;
pub mod thinfilm;
pub mod tracer;
pub mod wafer;

//! Walks rays through one textured, coated interface (`surface`; upright regular pyramids
//! four rays at a time in SIMD lanes, `packet`) and through the whole wafer (`wafer_trace`);
//! events go into a [`Tally`].
//!
//! Invariant: every figure comes with its standard error; for every ray the booked powers
//! (reflected, transmitted, film layers, abandoned) add up to its initial weight.
//! Not here: angular binning (`redistribution`), stacks of thick layers (`wafer`).

mod packet;
pub mod polarisation;
pub mod response;
pub mod surface;
pub mod tally;
pub mod wafer_trace;

pub use response::{
    BareInterface, COS_111_TILT, CoatedInterface, CoatingGeometry, FacetResponse, FacetSample,
    MAX_FILM_LAYERS, Side,
};
pub use surface::{
    BulkSink, Clear, ExitObserver, Incidence, InputPolarisation, Launcher, PolarisationMode,
    RAYS_PER_CHUNK, Surface,
};
pub use tally::{Estimate, Moments, Tally};
pub use wafer_trace::{ThickLayer, WaferModel, WaferModelError, WaferTally};

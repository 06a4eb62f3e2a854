//! Plots drawn by our own small renderer, to SVG (text) and PNG (pixels) from one display
//! list, so both files show the same picture; text uses our own stroke font ([`font`]).
//!
//! * [`LinePlot`]: curves vs a shared x axis (lines, dashed, points, line with a band).
//! * [`StackedArea`]: parts of a whole stacked vs x (e.g. where the light goes).
//! * [`BarChart`]: horizontal bars with value labels; several groups side by side.
//! * [`PolarMap`]: a heat map over polar angle θ × azimuth φ, radius ∝ sin θ.
//!
//! Output is deterministic: the same plot and size give the same bytes. Sizes are clamped
//! to [`MIN_SIZE_PX`, `MAX_SIZE_PX`]. Non-finite data points are skipped (lines break there).
//! Colours: the palette of M. Okabe & K. Ito, "Color Universal Design" (2008), readable with
//! the common forms of colour blindness.

mod area;
mod axes;
mod bar;
pub mod font;
mod line;
mod polar;
mod raster;
mod scene;
mod svg;
pub mod ticks;

pub use area::{Layer, StackedArea};
pub use bar::{BarChart, BarGroup};
pub use line::{LinePlot, Series, SeriesStyle};
pub use polar::PolarMap;
pub use scene::Color;

/// Smallest width or height drawn, in px.
pub const MIN_SIZE_PX: u32 = 64;
/// Largest width or height drawn, in px.
pub const MAX_SIZE_PX: u32 = 8192;

/// Okabe–Ito palette (black moved last): blue, vermillion, bluish green, reddish purple,
/// orange, sky blue, yellow, black.
pub const PALETTE: [Color; 8] = [
    Color::rgb(0x00, 0x72, 0xb2),
    Color::rgb(0xd5, 0x5e, 0x00),
    Color::rgb(0x00, 0x9e, 0x73),
    Color::rgb(0xcc, 0x79, 0xa7),
    Color::rgb(0xe6, 0x9f, 0x00),
    Color::rgb(0x56, 0xb4, 0xe9),
    Color::rgb(0xf0, 0xe4, 0x42),
    Color::rgb(0x00, 0x00, 0x00),
];

/// The `i`-th palette colour (cycling).
pub fn palette(i: usize) -> Color {
    PALETTE[i % PALETTE.len()]
}

/// Anything that draws itself to SVG and PNG.
pub trait Plot {
    /// The plot as an SVG document of `width` × `height` px (usable inline in HTML).
    fn to_svg(&self, width: u32, height: u32) -> String;
    /// The plot as PNG file bytes of `width` × `height` px (RGBA, opaque).
    fn to_png(&self, width: u32, height: u32) -> Vec<u8>;
}

fn clamp_size(v: u32) -> u32 {
    v.clamp(MIN_SIZE_PX, MAX_SIZE_PX)
}

/// Gives a type with `fn scene(&self, w, h) -> Scene` its `to_svg`/`to_png` methods and the
/// [`Plot`] trait.
macro_rules! drawable {
    ($t:ty) => {
        impl $t {
            /// The plot as an SVG document of `width` × `height` px (usable inline in HTML).
            pub fn to_svg(&self, width: u32, height: u32) -> String {
                let s = self.scene(
                    crate::report::plot::clamp_size(width),
                    crate::report::plot::clamp_size(height),
                );
                crate::report::plot::svg::render(&s)
            }

            /// The plot as PNG file bytes of `width` × `height` px (RGBA, opaque).
            pub fn to_png(&self, width: u32, height: u32) -> Vec<u8> {
                let s = self.scene(
                    crate::report::plot::clamp_size(width),
                    crate::report::plot::clamp_size(height),
                );
                crate::report::plot::raster::render_png(&s)
            }
        }

        impl crate::report::plot::Plot for $t {
            fn to_svg(&self, width: u32, height: u32) -> String {
                <$t>::to_svg(self, width, height)
            }
            fn to_png(&self, width: u32, height: u32) -> Vec<u8> {
                <$t>::to_png(self, width, height)
            }
        }
    };
}
pub(crate) use drawable;

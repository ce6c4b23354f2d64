//! The canvas every plot draws on: an in-memory RGB image with the embedded font
//! registered, the pixel rectangles of its panels (so tests can look inside them),
//! and PNG encoding.

use std::collections::BTreeMap;
use std::io::Cursor;
use std::path::Path;
use std::sync::Once;

use plotters::coord::CoordTranslate;
use plotters::coord::ranged1d::{Ranged, ValueFormatter};
use plotters::prelude::*;
use plotters::style::{FontStyle, register_font};

use crate::candidate::Verdict;
use crate::error::{Error, Result};

/// DejaVu Sans (Bitstream Vera licence, see `assets/fonts/DejaVuSans-LICENSE.txt`),
/// embedded so plots look the same on every machine and need no system fonts.
static FONT_TTF: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

/// Family name every text style in this module uses.
pub const FONT: &str = "sans-serif";

/// Registers the embedded font once per process.
pub(crate) fn ensure_font() {
    static ONCE: Once = Once::new();
    ONCE.call_once(|| {
        // The bytes are a known-good TTF compiled into the binary; failure is a build bug.
        if register_font(FONT, FontStyle::Normal, FONT_TTF).is_err() {
            panic!("embedded DejaVu Sans failed to parse");
        }
    });
}

/// Pixel rectangle of one panel's data area: `x0..x1`, `y0..y1` (y grows downwards).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct PanelRect {
    pub x0: i32,
    pub x1: i32,
    pub y0: i32,
    pub y1: i32,
}

impl PanelRect {
    pub(crate) fn from_ranges(x: std::ops::Range<i32>, y: std::ops::Range<i32>) -> Self {
        PanelRect {
            x0: x.start,
            x1: x.end,
            y0: y.start,
            y1: y.end,
        }
    }
}

/// A rendered figure: `width × height` RGB pixels, row-major, 3 bytes each.
#[derive(Debug, Clone)]
pub struct Figure {
    pub width: u32,
    pub height: u32,
    pub rgb: Vec<u8>,
    /// Data areas of the named panels, for tests and image maps.
    pub panels: BTreeMap<&'static str, PanelRect>,
}

impl Figure {
    /// A white canvas.
    pub(crate) fn blank(width: u32, height: u32) -> Self {
        ensure_font();
        Figure {
            width,
            height,
            rgb: vec![255; width as usize * height as usize * 3],
            panels: BTreeMap::new(),
        }
    }

    /// The colour at pixel `(x, y)`.
    pub fn pixel(&self, x: u32, y: u32) -> [u8; 3] {
        let i = (y as usize * self.width as usize + x as usize) * 3;
        [self.rgb[i], self.rgb[i + 1], self.rgb[i + 2]]
    }

    /// The figure encoded as PNG.
    pub fn to_png(&self) -> Vec<u8> {
        let img = image::RgbImage::from_raw(self.width, self.height, self.rgb.clone())
            .expect("buffer length matches the figure size");
        let mut out = Cursor::new(Vec::new());
        img.write_to(&mut out, image::ImageOutputFormat::Png)
            .expect("PNG encoding into memory cannot fail");
        out.into_inner()
    }

    /// Writes the figure as a PNG file.
    ///
    /// # Errors
    /// [`Error::Io`] naming `path`.
    pub fn save_png(&self, path: &Path) -> Result<()> {
        crate::atomic_file::write(path, self.to_png())
    }
}

/// A figure with the caption it is shown under.
pub type CaptionedFigure = (String, Figure);

/// Converts a plotters drawing error (only possible from a bug in our layout code,
/// since the backend is an in-memory buffer) into our error type.
pub(crate) fn draw_err<E: std::fmt::Debug>(e: E) -> Error {
    Error::Numerical(format!("plot drawing failed: {e:?}"))
}

/// Pixel box of a chart's data area.
pub(crate) fn panel_rect<DB: DrawingBackend, CT: CoordTranslate>(
    chart: &ChartContext<'_, DB, CT>,
) -> PanelRect {
    let (x, y) = chart.plotting_area().get_pixel_range();
    PanelRect::from_ranges(x, y)
}

/// Draws the series legend in the house style at `pos`.
pub(crate) fn draw_legend<'a, DB: DrawingBackend + 'a, CT: CoordTranslate>(
    chart: &mut ChartContext<'a, DB, CT>,
    pos: SeriesLabelPosition,
) -> Result<()> {
    chart
        .configure_series_labels()
        .position(pos)
        .background_style(WHITE.mix(0.85))
        .border_style(RGBColor(200, 200, 200))
        .label_font(text(12))
        .draw()
        .map_err(draw_err)
}

/// Draws labelled axes with a faint grid (the grid lines along x only if `x_grid`).
pub(crate) fn draw_axes<'a, DB, X, Y>(
    chart: &mut ChartContext<'a, DB, Cartesian2d<X, Y>>,
    x_desc: &str,
    y_desc: &str,
    x_grid: bool,
) -> Result<()>
where
    DB: DrawingBackend,
    X: Ranged + ValueFormatter<X::ValueType>,
    Y: Ranged + ValueFormatter<Y::ValueType>,
    X::ValueType: std::fmt::Debug,
    Y::ValueType: std::fmt::Debug,
{
    let mut mesh = chart.configure_mesh();
    if !x_grid {
        mesh.disable_x_mesh();
    }
    mesh.light_line_style(RGBColor(235, 235, 235))
        .x_desc(x_desc)
        .y_desc(y_desc)
        .label_style(text(12))
        .axis_desc_style(text(13))
        .draw()
        .map_err(draw_err)
}

/// Okabe & Ito (2008, "Color Universal Design") colour-blind-safe colours, one per verdict.
pub fn verdict_colour(v: Verdict) -> RGBColor {
    match v {
        Verdict::Astrophysical => RGBColor(0, 114, 178), // blue
        Verdict::Rfi => RGBColor(213, 94, 0),            // vermillion
        Verdict::Unsure => RGBColor(204, 121, 167),      // reddish purple
    }
}

/// Colour of masked channels in spectra and waterfalls.
pub const MASKED_GREY: RGBColor = RGBColor(205, 205, 205);

/// Text style of the given size in the embedded font.
pub(crate) fn text(size: u32) -> TextStyle<'static> {
    (FONT, size).into_font().color(&BLACK)
}

/// Viridis (perceptually uniform, colour-blind safe) for a value in `[lo, hi]`, clipped.
pub(crate) fn viridis(v: f64, lo: f64, hi: f64) -> RGBColor {
    use plotters::style::colors::colormaps::{ColorMap, ViridisRGB};
    let v = v.clamp(lo, hi);
    ViridisRGB.get_color_normalized(v, lo, hi)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn png_round_trips_size_and_pixels() {
        let mut f = Figure::blank(7, 5);
        f.rgb[3 * (2 * 7 + 3)] = 10; // pixel (3, 2), red channel
        let png = f.to_png();
        assert_eq!(&png[1..4], b"PNG");
        let back = image::load_from_memory(&png).unwrap().to_rgb8();
        assert_eq!(back.dimensions(), (7, 5));
        assert_eq!(back.get_pixel(3, 2).0, [10, 255, 255]);
        assert_eq!(f.pixel(3, 2), [10, 255, 255]);
    }

    #[test]
    fn viridis_runs_dark_to_light() {
        let lum = |c: RGBColor| 0.3 * c.0 as f64 + 0.59 * c.1 as f64 + 0.11 * c.2 as f64;
        let (a, b) = (viridis(0.0, 0.0, 1.0), viridis(1.0, 0.0, 1.0));
        assert!(lum(a) < 80.0 && lum(b) > 180.0, "{a:?} {b:?}");
        assert_eq!(viridis(-5.0, 0.0, 1.0), a, "values below the range clip");
    }
}

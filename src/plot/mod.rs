//! Publication figures: one theme, a font embedded in the binary, three formats.
//!
//! Every figure is drawn once per backend from the same code: SVG (sized in inches, so it
//! imports at the right size), PNG at 300 dpi (with the resolution recorded in the file), and
//! vector PDF converted from the SVG with the embedded font (DejaVu Sans, from the `dejavu`
//! crate; its licence allows embedding). Nothing depends on fonts installed on the machine.
//! Colours are the Okabe–Ito palette (distinguishable with the common colour-vision
//! deficiencies); series also differ by marker shape, so figures read in grey.

pub mod figures;

use plotters::prelude::*;
use std::sync::Once;

/// Figure widths for journals: one column ≈ 3.4 in, two columns ≈ 7 in.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Size {
    OneColumn,
    TwoColumn,
}

impl Size {
    /// (width, height) in inches.
    pub fn inches(self) -> (f64, f64) {
        match self {
            Size::OneColumn => (3.4, 2.6),
            Size::TwoColumn => (7.0, 3.6),
        }
    }
}

/// Raster resolution; also the unit of the vector drawings (1 unit = 1/300 in).
pub const DPI: f64 = 300.0;

/// Okabe & Ito (2008), "Color Universal Design": black, orange, sky blue, bluish green,
/// blue, vermillion, reddish purple, yellow.
pub const PALETTE: [RGBColor; 8] = [
    RGBColor(0, 0, 0),
    RGBColor(230, 159, 0),
    RGBColor(86, 180, 233),
    RGBColor(0, 158, 115),
    RGBColor(0, 114, 178),
    RGBColor(213, 94, 0),
    RGBColor(204, 121, 167),
    RGBColor(240, 228, 66),
];

/// Text sizes in points, converted to drawing units.
pub fn pt(points: f64) -> f64 {
    points / 72.0 * DPI
}

/// Registers the embedded font under the family name plotters uses.
pub fn register_font() {
    static ONCE: Once = Once::new();
    ONCE.call_once(|| {
        let bytes: &'static [u8] = dejavu::sans::regular();
        // A failure here would mean the embedded font is broken: a build defect.
        let _ = plotters::style::register_font("sans-serif", FontStyle::Normal, bytes);
    });
}

/// Pixel size of a figure.
pub fn pixels(size: Size) -> (u32, u32) {
    let (w, h) = size.inches();
    ((w * DPI).round() as u32, (h * DPI).round() as u32)
}

/// A figure drawable on any plotters backend (SVG and PNG share one drawing routine).
pub trait Figure {
    fn draw<DB: DrawingBackend>(
        &self,
        root: DrawingArea<DB, plotters::coord::Shift>,
    ) -> Result<(), String>
    where
        DB::ErrorType: 'static;
}

/// Renders a figure to an SVG string sized in inches.
pub fn to_svg(size: Size, fig: &impl Figure) -> Result<String, String> {
    register_font();
    let (w, h) = pixels(size);
    let mut s = String::new();
    {
        let root = SVGBackend::with_string(&mut s, (w, h)).into_drawing_area();
        fig.draw(root)?;
    }
    let (wi, hi) = size.inches();
    let from = format!("width=\"{w}\" height=\"{h}\"");
    let to = format!("width=\"{wi}in\" height=\"{hi}in\"");
    Ok(s.replacen(&from, &to, 1))
}

/// Renders a figure to a PNG at 300 dpi (resolution recorded in the pHYs chunk).
pub fn to_png(size: Size, fig: &impl Figure) -> Result<Vec<u8>, String> {
    register_font();
    let (w, h) = pixels(size);
    let mut rgb = vec![255u8; (w * h * 3) as usize];
    {
        let root = BitMapBackend::with_buffer(&mut rgb, (w, h)).into_drawing_area();
        fig.draw(root)?;
    }
    let mut out = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut out, w, h);
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        let ppm = (DPI / 0.0254).round() as u32;
        enc.set_pixel_dims(Some(png::PixelDimensions {
            xppu: ppm,
            yppu: ppm,
            unit: png::Unit::Meter,
        }));
        let mut wr = enc.write_header().map_err(|e| e.to_string())?;
        wr.write_image_data(&rgb).map_err(|e| e.to_string())?;
    }
    Ok(out)
}

/// Converts kiln's SVG to a vector PDF with the embedded font.
pub fn svg_to_pdf(svg: &str) -> Result<Vec<u8>, String> {
    use svg2pdf::usvg;
    let mut opt = usvg::Options::default();
    opt.fontdb_mut()
        .load_font_data(dejavu::sans::regular().to_vec());
    opt.fontdb_mut().set_sans_serif_family("DejaVu Sans");
    opt.font_family = "DejaVu Sans".into();
    let tree = usvg::Tree::from_str(svg, &opt).map_err(|e| e.to_string())?;
    // usvg measures in CSS pixels (96 per inch); the page keeps the figure's inches.
    let page = svg2pdf::PageOptions { dpi: 96.0 };
    svg2pdf::to_pdf(&tree, svg2pdf::ConversionOptions::default(), page)
        .map_err(|e| format!("{e:?}"))
}

/// Maps a plotters drawing error to a message.
pub fn err<E: std::fmt::Debug>(e: E) -> String {
    format!("drawing failed: {e:?}")
}

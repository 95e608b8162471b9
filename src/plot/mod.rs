//! Publication figures: one theme, a font embedded in the binary, three formats.
//!
//! Every figure is drawn once per backend from the same code: SVG (sized in inches, so it
//! imports at the right size), PNG at 300 dpi (with the resolution recorded in the file), and
//! vector PDF converted from the SVG with the embedded font (DejaVu Sans, from the `dejavu`
//! crate; its licence allows embedding). Nothing depends on fonts installed on the machine.
//! Series take kiln's own colours ([`COLORS`]) and each its own marker ([`SHAPES`]), shown in
//! the legend too, so figures read in grey.

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

/// kiln's series colours, in the order series take them. Neighbours in the list differ in
/// hue and mostly in grey level; in grey every series is told apart by its marker
/// ([`SHAPES`]), which no two of the first eight share.
pub const COLORS: [RGBColor; 8] = [
    RGBColor(0, 70, 140),
    RGBColor(230, 150, 30),
    RGBColor(0, 140, 110),
    RGBColor(150, 30, 60),
    RGBColor(110, 170, 220),
    RGBColor(90, 90, 90),
    RGBColor(200, 90, 160),
    RGBColor(170, 140, 0),
];

/// A marker's outline.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Outline {
    Circle,
    Square,
    Triangle,
    Diamond,
}

/// A marker: an outline, filled or open.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Shape {
    pub outline: Outline,
    pub filled: bool,
}

/// The markers series take, in order: each of four outlines once filled and once open,
/// alternating so that neighbours (also the eighth and the first) differ in both.
pub const SHAPES: [Shape; 8] = [
    Shape {
        outline: Outline::Circle,
        filled: true,
    },
    Shape {
        outline: Outline::Square,
        filled: false,
    },
    Shape {
        outline: Outline::Triangle,
        filled: true,
    },
    Shape {
        outline: Outline::Diamond,
        filled: false,
    },
    Shape {
        outline: Outline::Square,
        filled: true,
    },
    Shape {
        outline: Outline::Circle,
        filled: false,
    },
    Shape {
        outline: Outline::Diamond,
        filled: true,
    },
    Shape {
        outline: Outline::Triangle,
        filled: false,
    },
];

/// How series i is drawn: its colour and its marker (both cycle after eight series).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SeriesStyle {
    pub color: RGBColor,
    pub shape: Shape,
}

/// The style of series i.
pub fn series(i: usize) -> SeriesStyle {
    SeriesStyle {
        color: COLORS[i % COLORS.len()],
        shape: SHAPES[i % SHAPES.len()],
    }
}

/// The grey level (0–255) a colour prints as (Rec. 601 luma, common practice).
pub fn grey(c: RGBColor) -> f64 {
    0.299 * c.0 as f64 + 0.587 * c.1 as f64 + 0.114 * c.2 as f64
}

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

/// Pixel size of one figure at `size` (its own height).
fn fig_pixels(size: Size, fig: &impl Figure) -> (u32, u32) {
    (
        (size.inches().0 * DPI).round() as u32,
        (fig.height(size) * DPI).round() as u32,
    )
}

/// A figure drawable on any plotters backend (SVG and PNG share one drawing routine).
pub trait Figure {
    /// The caption, with its sources: written beside the image (`.tex`, and the `.csv`
    /// header), never into it.
    fn caption(&self) -> String;
    /// The height in inches at `size` (the size's own, unless the figure needs more, as a
    /// figure split into panels does).
    fn height(&self, size: Size) -> f64 {
        size.inches().1
    }
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
    let (w, h) = fig_pixels(size, fig);
    let mut s = String::new();
    {
        let root = SVGBackend::with_string(&mut s, (w, h)).into_drawing_area();
        fig.draw(root)?;
    }
    let (wi, hi) = (size.inches().0, fig.height(size));
    let from = format!("width=\"{w}\" height=\"{h}\"");
    let to = format!("width=\"{wi}in\" height=\"{hi}in\"");
    Ok(s.replacen(&from, &to, 1))
}

/// Renders a figure to a PNG at 300 dpi (resolution recorded in the pHYs chunk).
pub fn to_png(size: Size, fig: &impl Figure) -> Result<Vec<u8>, String> {
    register_font();
    let (w, h) = fig_pixels(size, fig);
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
    let mut pdf = svg2pdf::to_pdf(&tree, svg2pdf::ConversionOptions::default(), page)
        .map_err(|e| format!("{e:?}"))?;
    sort_resource_entries(&mut pdf);
    Ok(pdf)
}

/// The converter lists a page's resources (`/XObject`, `/ExtGState`, …) in hash-map order,
/// which differs from run to run, so the same figure gave different PDF bytes. This sorts
/// the entry lines of every such dictionary whose entries are all plain references
/// (`/name N 0 R`, one per line). Lines only change places, so every byte offset (and the
/// cross-reference table) stays valid.
fn sort_resource_entries(pdf: &mut [u8]) {
    const HEADS: [&[u8]; 5] = [
        b"/XObject <<\n",
        b"/ExtGState <<\n",
        b"/Font <<\n",
        b"/Pattern <<\n",
        b"/Shading <<\n",
    ];
    let is_entry = |line: &[u8]| {
        let t: Vec<&[u8]> = line
            .split(|&b| b == b' ')
            .filter(|w| !w.is_empty())
            .collect();
        t.len() == 4
            && t[0].len() > 1
            && t[0][0] == b'/'
            && t[0][1..].iter().all(u8::is_ascii_alphanumeric)
            && t[1].iter().all(u8::is_ascii_digit)
            && t[2] == b"0"
            && t[3] == b"R"
    };
    let mut at = 0;
    while at < pdf.len() {
        let Some((start, head)) = HEADS
            .iter()
            .filter_map(|h| find(&pdf[at..], h).map(|i| (at + i, h.len())))
            .min()
        else {
            break;
        };
        let body = start + head;
        let mut lines: Vec<Vec<u8>> = Vec::new();
        let mut i = body;
        let mut closed = false;
        while let Some(len) = pdf[i..].iter().position(|&b| b == b'\n') {
            let line = &pdf[i..i + len];
            if line.iter().all(|&b| b == b' ' || b == b'>') && line.ends_with(b">>") {
                closed = true;
                break;
            }
            if !is_entry(line) {
                break;
            }
            lines.push(pdf[i..=i + len].to_vec());
            i += len + 1;
        }
        if closed && lines.len() > 1 {
            lines.sort();
            pdf[body..i].copy_from_slice(&lines.concat());
        }
        at = i.max(body);
    }
}

fn find(hay: &[u8], needle: &[u8]) -> Option<usize> {
    hay.windows(needle.len()).position(|w| w == needle)
}

/// Maps a plotters drawing error to a message.
pub fn err<E: std::fmt::Debug>(e: E) -> String {
    format!("drawing failed: {e:?}")
}

#[cfg(test)]
mod tests {
    use super::*;

    /// In grey every one of the first eight series is told apart by its marker alone (no two
    /// share outline and fill), neighbours differ in outline and in fill, and every colour is
    /// dark enough to see on white in grey (level ≤ 180 of 255; common practice for print).
    #[test]
    fn series_read_in_grey() {
        for i in 0..8 {
            for j in 0..i {
                assert_ne!(series(i).shape, series(j).shape, "series {i} and {j}");
            }
            let (a, b) = (series(i).shape, series(i + 1).shape);
            assert!(a.outline != b.outline && a.filled != b.filled, "{i}");
            assert!(
                grey(series(i).color) <= 180.0,
                "{i}: {}",
                grey(series(i).color)
            );
        }
    }

    /// The same SVG gives the same PDF bytes every time (it did not: the converter's resource
    /// dictionaries came out in hash-map order). Three translucent groups make three
    /// `/ExtGState` and three `/XObject` entries, so an unsorted order shows up in a few of
    /// eight conversions with near certainty.
    #[test]
    fn pdf_bytes_are_reproducible() {
        let svg = r#"<svg xmlns="http://www.w3.org/2000/svg" width="2in" height="1in" viewBox="0 0 192 96">
<g opacity="0.2"><rect x="0" y="0" width="50" height="50" fill="red"/></g>
<g opacity="0.5"><rect x="60" y="0" width="50" height="50" fill="green"/></g>
<g opacity="0.8"><rect x="120" y="0" width="50" height="50" fill="blue"/></g>
<text x="10" y="90" font-size="12">energy per spin</text>
</svg>"#;
        let first = svg_to_pdf(svg).unwrap();
        let text = String::from_utf8_lossy(&first);
        assert!(text.contains("/ExtGState <<"), "{text}");
        for _ in 0..7 {
            assert_eq!(svg_to_pdf(svg).unwrap(), first);
        }
    }

    /// Only whole reference lines move; the length (and so every offset) is unchanged, and a
    /// dictionary with any other kind of entry is left alone.
    #[test]
    fn resource_lines_are_sorted_in_place() {
        let mut pdf = b"4 0 obj\n<<\n  /XObject <<\n    /xo1 10 0 R\n    /xo0 8 0 R\n  >>\n  /Font <<\n    /fo1 2 0 R\n    /fo0 [1 0 R]\n  >>\n>>\nendobj\n".to_vec();
        let before = pdf.len();
        sort_resource_entries(&mut pdf);
        let text = String::from_utf8(pdf.clone()).unwrap();
        assert_eq!(pdf.len(), before);
        assert!(
            text.contains("/XObject <<\n    /xo0 8 0 R\n    /xo1 10 0 R\n  >>"),
            "{text}"
        );
        assert!(text.contains("/fo1 2 0 R\n    /fo0 [1 0 R]"), "{text}");
    }
}

//! `kiln plot`: the figures open, carry their text without system fonts, and come with data.

use crate::util::{Work, stderr};

const SPEC: &str = r#"[experiment]
name = "figs"
[model]
family = "sk"
[sweep]
sizes = [16, 24, 32, 48]
seeds = 4
epsilons = [0.0, 0.05, 0.3]
[[algorithm]]
label = "descent"
kind = "descent"
[[algorithm]]
label = "anneal"
kind = "anneal"
sweeps = 30
"#;

fn plotted() -> Work {
    let w = Work::new();
    let s = w.spec("f.toml", SPEC);
    w.run_json(&s, &[]);
    let o = w.kiln(&["plot", s.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    w
}

/// Counts dark pixels (all channels < 128) in a rectangle of an RGB PNG.
fn dark_pixels(
    png_bytes: &[u8],
    x0: f64,
    x1: f64,
    y0: f64,
    y1: f64,
) -> (usize, (u32, u32), Option<png::PixelDimensions>) {
    let dec = png::Decoder::new(png_bytes);
    let mut r = dec.read_info().unwrap();
    let mut buf = vec![0; r.output_buffer_size()];
    let info = r.next_frame(&mut buf).unwrap();
    let (w, h) = (info.width, info.height);
    let dims = r.info().pixel_dims;
    let mut dark = 0;
    for y in (y0 * h as f64) as u32..(y1 * h as f64) as u32 {
        for x in (x0 * w as f64) as u32..(x1 * w as f64) as u32 {
            let i = ((y * w + x) * 3) as usize;
            if buf[i] < 128 && buf[i + 1] < 128 && buf[i + 2] < 128 {
                dark += 1;
            }
        }
    }
    (dark, (w, h), dims)
}

/// The PNG is 300 dpi at one-column width, and text is drawn from the embedded font: glyph
/// pixels exist in the x-axis label band and in the legend corner, although the font is not
/// installed on the machine (tests do not depend on system fonts). The caption is not in the
/// image: it is the `.tex` sidecar's `\caption` and ends the CSV's first line.
#[test]
fn png_has_labels_legend_and_resolution() {
    let w = plotted();
    let fig = w.path().join("results/figs/figures");
    let bytes = std::fs::read(fig.join("energy-sk-gaussian.png")).unwrap();
    let (_, (width, height), dims) = dark_pixels(&bytes, 0.0, 0.0, 0.0, 0.0);
    assert_eq!((width, height), (1020, 780));
    let d = dims.expect("pHYs chunk");
    assert_eq!(d.unit, png::Unit::Meter);
    assert!((d.xppu as f64 * 0.0254 - 300.0).abs() < 0.5, "{d:?}");
    // x-axis description: centred, at the bottom (no caption band below it).
    let (label, ..) = dark_pixels(&bytes, 0.35, 0.65, 0.92, 0.995);
    assert!(label > 200, "x label: {label} dark pixels");
    // Legend in the upper right.
    let (legend, ..) = dark_pixels(&bytes, 0.55, 0.98, 0.02, 0.16);
    assert!(legend > 300, "legend: {legend} dark pixels");
    // The caption beside the image.
    let tex = std::fs::read_to_string(fig.join("energy-sk-gaussian.tex")).unwrap();
    assert!(
        tex.contains("\\caption{SK") && tex.contains("$\\varepsilon$"),
        "{tex}"
    );
    let csv = std::fs::read_to_string(fig.join("energy-sk-gaussian.csv")).unwrap();
    let first = csv.lines().next().unwrap();
    assert!(
        first.starts_with("# kiln figure data") && first.contains("; caption=SK"),
        "{first}"
    );
    // A blank region stays blank (the count is not trivially large everywhere).
    let (blank, ..) = dark_pixels(&bytes, 0.97, 1.0, 0.40, 0.50);
    assert!(blank < 50, "{blank}");
}

/// The SVG is well-formed XML (parsed by roxmltree), sized in inches, and holds the labels.
#[test]
fn svg_is_well_formed() {
    let w = plotted();
    let text =
        std::fs::read_to_string(w.path().join("results/figs/figures/energy-sk-gaussian.svg"))
            .unwrap();
    let doc = roxmltree::Document::parse(&text).expect("well-formed SVG");
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "svg");
    assert_eq!(root.attribute("width"), Some("3.4in"));
    let texts: Vec<&str> = doc.descendants().filter_map(|n| n.text()).collect();
    assert!(
        texts.iter().any(|t| t.contains("energy per spin")),
        "{texts:?}"
    );
    assert!(
        texts.iter().any(|t| t.contains("Parisi value")),
        "{texts:?}"
    );
}

/// The PDF has a valid structure, embeds the font (text is not dropped), and, where poppler's
/// pdfinfo is installed, parses and reports the one-column page size (3.4 in = 244.8 pt).
#[test]
fn pdf_is_valid_and_embeds_its_font() {
    let w = plotted();
    let pdf = std::fs::read(w.path().join("results/figs/figures/energy-sk-gaussian.pdf")).unwrap();
    assert!(pdf.starts_with(b"%PDF-1."));
    assert!(pdf.ends_with(b"%%EOF") || pdf.ends_with(b"%%EOF\n"));
    let text = String::from_utf8_lossy(&pdf);
    assert!(text.contains("/FontFile2"), "no embedded TrueType font");
    assert!(text.contains("DejaVuSans"), "font not named");
    assert!(text.contains("startxref"));
    match std::process::Command::new("pdfinfo")
        .arg(w.path().join("results/figs/figures/energy-sk-gaussian.pdf"))
        .output()
    {
        Ok(o) => {
            let info = String::from_utf8_lossy(&o.stdout);
            assert!(
                o.status.success(),
                "pdfinfo rejects the file: {}",
                String::from_utf8_lossy(&o.stderr)
            );
            assert!(info.contains("244.8 x 187.2 pts"), "{info}");
        }
        Err(_) => eprintln!("pdfinfo not installed: structural checks only"),
    }
}

/// Every figure has its data sidecar with the spec hash; the sidecar's extrapolated value is
/// the one `kiln fit` reports.
#[test]
fn sidecars_hold_the_plotted_data() {
    let w = plotted();
    let fig = w.path().join("results/figs/figures");
    for name in [
        "energy-sk-gaussian",
        "stability-descent",
        "stability-anneal",
    ] {
        for ext in ["svg", "png", "pdf", "csv"] {
            assert!(fig.join(format!("{name}.{ext}")).is_file(), "{name}.{ext}");
        }
    }
    let manifest: toml::Table =
        std::fs::read_to_string(w.path().join("results/figs/manifest.toml"))
            .unwrap()
            .parse()
            .unwrap();
    let hash = manifest["spec_hash"].as_str().unwrap();
    let csv = std::fs::read_to_string(fig.join("energy-sk-gaussian.csv")).unwrap();
    assert!(
        csv.lines()
            .next()
            .unwrap()
            .contains(&format!("spec_hash={hash}")),
        "{csv}"
    );
    let extrapolated: f64 = csv
        .lines()
        .find(|l| l.starts_with("descent,extrapolated"))
        .unwrap()
        .split(',')
        .nth(4)
        .unwrap()
        .parse()
        .unwrap();
    let o = w.kiln(&["fit", "f.toml", "--json", "--bootstrap", "0"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let fitted = v["fits"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["algorithm"] == "descent" && f["epsilon"] == 0.0)
        .unwrap()["e_inf"]
        .as_f64()
        .unwrap();
    assert_eq!(extrapolated.to_bits(), fitted.to_bits());
    // Four sizes × 2 ε levels > 0 in the stability data.
    let st = std::fs::read_to_string(fig.join("stability-descent.csv")).unwrap();
    assert_eq!(
        st.lines().filter(|l| l.starts_with("n=")).count(),
        8,
        "{st}"
    );
}

#[test]
fn two_column_width() {
    let w = Work::new();
    let s = w.spec("f.toml", SPEC);
    w.run_json(&s, &[]);
    let o = w.kiln(&["plot", s.to_str().unwrap(), "--width", "two"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let svg = std::fs::read_to_string(w.path().join("results/figs/figures/energy-sk-gaussian.svg"))
        .unwrap();
    assert!(svg.contains("width=\"7in\""));
    let o = w.kiln(&["plot", s.to_str().unwrap(), "--width", "three"]);
    assert_eq!(o.status.code(), Some(2));
}

/// The figure draws the fit `kiln fit` reports: with `[fit] omega = 1.0` (and with ω fitted,
/// `terms`, `min_n`) the energy figure's extrapolated point of each algorithm equals the e∞ of
/// `kiln fit --json` at ε = 0, and its header and caption name the settings.
#[test]
fn the_figure_and_the_table_come_from_one_fit() {
    for fit in [
        "omega = 1.0",
        "omega = \"fit\"\nmin_n = 24",
        "omega = 0.5\nterms = 2",
    ] {
        let w = Work::new();
        let s = w.spec("f.toml", &format!("{SPEC}\n[fit]\n{fit}\nbootstrap = 0\n"));
        w.run_json(&s, &[]);
        let o = w.kiln(&["fit", s.to_str().unwrap(), "--json"]);
        assert!(o.status.success(), "{}", stderr(&o));
        let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
        let o = w.kiln(&["plot", s.to_str().unwrap()]);
        assert!(o.status.success(), "{}", stderr(&o));
        let csv =
            std::fs::read_to_string(w.path().join("results/figs/figures/energy-sk-gaussian.csv"))
                .unwrap();
        let mut checked = 0;
        for line in csv.lines().filter(|l| l.contains(",extrapolated,")) {
            let cols: Vec<&str> = line.split(',').collect();
            let e: f64 = cols[4].parse().unwrap();
            let table = v["fits"]
                .as_array()
                .unwrap()
                .iter()
                .find(|f| f["algorithm"] == cols[0] && f["epsilon"] == 0.0)
                .unwrap_or_else(|| panic!("{fit}: no fit of {} in {v}", cols[0]));
            assert_eq!(e, table["e_inf"].as_f64().unwrap(), "{fit}: {line}");
            checked += 1;
        }
        assert_eq!(checked, 2, "{fit}: {csv}");
        if fit.contains("1.0") {
            assert!(
                csv.starts_with("# ") && csv.lines().next().unwrap().contains("omega=1"),
                "{csv}"
            );
        }
    }
}

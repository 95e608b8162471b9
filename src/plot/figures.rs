//! The figures kiln draws: energy against n^{-ω} with the finite-size-scaling fit, and
//! stability (distance against ε on log–log axes).

use super::{Outline, SeriesStyle, err, pt, series};
use crate::fit::{Fit, format::with_error};
use plotters::chart::MeshStyle;
use plotters::coord::Shift;
use plotters::element::{Drawable, PointCollection};
use plotters::prelude::*;
use plotters_backend::DrawingErrorKind;

/// One algorithm's energies: per size (n, mean, se) and its fit.
#[derive(Clone, Debug)]
pub struct EnergySeries {
    pub label: String,
    pub points: Vec<(f64, f64, f64)>,
    pub fit: Option<Fit>,
}

/// Energy per spin against n^{-ω}.
#[derive(Clone, Debug)]
pub struct EnergyFigure {
    pub omega: f64,
    pub series: Vec<EnergySeries>,
    /// Horizontal reference lines (value, legend text).
    pub theory: Vec<(f64, String)>,
    pub caption: String,
}

/// One curve (a size, or an algorithm at a size): (ε, mean distance, se) of the outputs and,
/// where the algorithm has a point before rounding, of those points; and the fitted log–log
/// slope.
#[derive(Clone, Debug)]
pub struct StabilitySeries {
    pub label: String,
    pub points: Vec<(f64, f64, f64)>,
    /// (ε, mean distance_point, se): the points before rounding (empty when none).
    pub before_rounding: Vec<(f64, f64, f64)>,
    pub slope: Option<Slope>,
}

/// A log–log slope of distance against ε with its standard error and goodness of fit.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Slope {
    pub slope: f64,
    /// Standard error, inflated by sqrt(χ²/dof) when that exceeds 1 (the Birge ratio; common
    /// practice for a fit whose scatter exceeds its error bars).
    pub se: f64,
    pub chi2: f64,
    pub dof: usize,
}

impl Slope {
    /// Whether a figure prints it: at least three points (one degree of freedom), χ²/dof ≤ 3
    /// (a straight line describes the points; threshold common practice), and a slope at least
    /// two errors away from 0 (a flat curve has no slope worth a number).
    pub fn printable(&self) -> bool {
        self.dof >= 1 && self.chi2 / self.dof as f64 <= 3.0 && self.slope.abs() >= 2.0 * self.se
    }
}

/// Weighted least squares of log y on log x for points (x, y, se) with x, y > 0: weights
/// 1/σ² with σ = se/y (the error of log y), floored at 1e-3 so that a point whose seeds all
/// agree does not take all the weight. None below two points.
pub fn loglog_fit(points: &[(f64, f64, f64)]) -> Option<Slope> {
    let pts: Vec<&(f64, f64, f64)> = points.iter().filter(|p| p.0 > 0.0 && p.1 > 0.0).collect();
    if pts.len() < 2 {
        return None;
    }
    let x: Vec<Vec<f64>> = pts.iter().map(|p| vec![1.0, p.0.ln()]).collect();
    let y: Vec<f64> = pts.iter().map(|p| p.1.ln()).collect();
    let w: Vec<f64> = pts.iter().map(|p| (p.2 / p.1).max(1e-3).powi(-2)).collect();
    // The project's weighted least squares (QR); None when every ε is the same.
    let sol = crate::fit::wls::solve(&x, &y, &w)?;
    let dof = pts.len() - 2;
    let birge = if dof > 0 {
        (sol.chi2 / dof as f64).sqrt().max(1.0)
    } else {
        1.0
    };
    Some(Slope {
        slope: sol.beta[1],
        se: birge * sol.cov[1][1].sqrt(),
        chi2: sol.chi2,
        dof,
    })
}

#[derive(Clone, Debug)]
pub struct StabilityFigure {
    pub title: String,
    pub series: Vec<StabilitySeries>,
    pub caption: String,
    /// Distances modulo the global flip (the model's σ and −σ are one state).
    pub modulo_flip: bool,
}

/// One size's overlap histogram: bin edges on [−1, 1] and densities.
#[derive(Clone, Debug)]
pub struct OverlapSeries {
    pub label: String,
    /// (bin low, bin high, density) with Σ density·width = 1.
    pub bins: Vec<(f64, f64, f64)>,
}

/// Histograms of pairwise replica overlaps, one outline per n.
#[derive(Clone, Debug)]
pub struct OverlapFigure {
    pub title: String,
    pub series: Vec<OverlapSeries>,
    pub caption: String,
    /// Vertical dashed lines at these overlaps, with one legend entry (e.g. ±q_max).
    pub markers: Option<(Vec<f64>, String)>,
    /// A second panel: the empirical distribution function of the overlap (|R| for models
    /// whose σ and −σ are one state) per n, against the Parisi order parameter x(q).
    pub distribution: Option<OverlapDistribution>,
}

/// The distribution-function panel of an overlap figure.
#[derive(Clone, Debug)]
pub struct OverlapDistribution {
    /// Per series (same order as the histograms): the sorted overlaps.
    pub samples: Vec<Vec<f64>>,
    /// x(q) as (q, x) corners of its step graph, and its legend text.
    pub parisi: (Vec<(f64, f64)>, String),
    /// Axis text, e.g. "|overlap|".
    pub axis: String,
}

/// The corners of the graph of the empirical distribution function of sorted values on
/// [lo, 1].
pub fn empirical_cdf(sorted: &[f64], lo: f64) -> Vec<(f64, f64)> {
    let k = sorted.len().max(1) as f64;
    let mut v = vec![(lo, 0.0)];
    for (i, &x) in sorted.iter().enumerate() {
        v.push((x, i as f64 / k));
        v.push((x, (i + 1) as f64 / k));
    }
    v.push((1.0, sorted.len() as f64 / k));
    v
}

/// One trace: (sweep at the end of a block, block mean of H/n).
#[derive(Clone, Debug)]
pub struct TraceSeries {
    pub label: String,
    pub points: Vec<(f64, f64)>,
}

/// A sampler's energy traces against sweeps (log axis), one line per n, with a dashed line at
/// the Gibbs mean energy where kiln has it.
#[derive(Clone, Debug)]
pub struct TraceFigure {
    pub title: String,
    /// "sweep" or "step": the unit of the time axis.
    pub unit: String,
    pub series: Vec<TraceSeries>,
    pub caption: String,
    pub target: Option<(f64, String)>,
}

impl super::Figure for TraceFigure {
    fn caption(&self) -> String {
        format!("{}: {}", self.title, self.caption)
    }
    fn draw<DB: DrawingBackend>(&self, root: DrawingArea<DB, Shift>) -> Result<(), String>
    where
        DB::ErrorType: 'static,
    {
        let main = blank(&root)?;
        let pts = self.series.iter().flat_map(|s| s.points.iter());
        let (mut xlo, mut xhi, mut lo, mut hi) = (f64::MAX, 1.0f64, f64::MAX, f64::MIN);
        for &(x, y) in pts {
            xlo = xlo.min(x);
            xhi = xhi.max(x);
            lo = lo.min(y);
            hi = hi.max(y);
        }
        if xlo == f64::MAX {
            return Err("no trace points to draw".into());
        }
        if let Some((e, _)) = &self.target {
            lo = lo.min(*e);
            hi = hi.max(*e);
        }
        let xlo = xlo.max(1e-3);
        let pad = 0.08 * (hi - lo).max(1e-3);
        // Headroom above the data: the legend goes there, off the traces.
        let (lo, hi) = (lo - pad, hi + 0.45 * (hi - lo).max(1e-3));
        let mut chart = ChartBuilder::on(&main)
            .margin(pt(5.0) as u32)
            .x_label_area_size(pt(20.0) as u32)
            .y_label_area_size(pt(30.0) as u32)
            .build_cartesian_2d(
                (xlo / 1.3..xhi * 1.3)
                    .log_scale()
                    .with_key_points(log_ticks(xlo / 1.3, xhi * 1.3)),
                lo..hi,
            )
            .map_err(err)?;
        let fy = ticks(chart.y_range(), 5);
        house_mesh(
            &mut chart.configure_mesh(),
            &format!("{}s", self.unit),
            "energy per spin H/n (maximised)",
            (5, 5),
        )
        .x_label_formatter(&|x| format!("{}", (x * 1e6).round() / 1e6))
        .y_label_formatter(&fy)
        .draw()
        .map_err(err)?;
        let mut covered: Vec<(i32, i32)> = Vec::new();
        let mut labels: Vec<String> = Vec::new();
        if let Some((e, label)) = &self.target {
            let line = vec![(xlo / 1.3, *e), (xhi * 1.3, *e)];
            covered.extend(line_pixels(chart.plotting_area(), &line));
            theory_line(&mut chart, line, label, 0)?;
            labels.push(label.clone());
        }
        for (i, s) in self.series.iter().enumerate() {
            let style = series(i);
            let color = style.color;
            // Line styles differ too (solid, then dashed with growing gaps), so the traces
            // read in grey.
            let line = color.stroke_width(3);
            let pts: Vec<(f64, f64)> = s.points.clone();
            covered.extend(line_pixels(chart.plotting_area(), &pts));
            labels.push(s.label.clone());
            let drawn = if i == 0 {
                chart.draw_series(LineSeries::new(pts, line)).map_err(err)?
            } else {
                chart
                    .draw_series(DashedLineSeries::new(
                        pts,
                        pt(1.0 + i as f64) as u32,
                        pt(1.0) as u32,
                        line,
                    ))
                    .map_err(err)?
            };
            drawn
                .label(s.label.clone())
                .legend(move |c| legend_glyph(style, c));
        }
        let corner = legend_corner(&chart.plotting_area().get_pixel_range(), &covered, &labels);
        house_legend(&mut chart, corner)?;
        root.present().map_err(err)
    }
}

/// A labelled series of (x, mean, se) points.
pub type ScanSeries = (String, Vec<(f64, f64, f64)>);

/// One panel of a scan along a parameter (β for samplers, the density α for constraint
/// families): per n, (x, mean, se) points joined by lines, and a dashed theory curve (x, value)
/// where kiln has one.
#[derive(Clone, Debug)]
pub struct ScanPanel {
    pub x_label: String,
    pub y_label: String,
    pub series: Vec<ScanSeries>,
    pub theory: Option<(Vec<(f64, f64)>, String)>,
}

/// Panels side by side against one parameter: a sampler kind at several inverse
/// temperatures, or the fraction of formulas solved against the density.
#[derive(Clone, Debug)]
pub struct ScanFigure {
    pub panels: Vec<ScanPanel>,
    pub caption: String,
}

impl super::Figure for ScanFigure {
    fn caption(&self) -> String {
        self.caption.clone()
    }
    fn draw<DB: DrawingBackend>(&self, root: DrawingArea<DB, Shift>) -> Result<(), String>
    where
        DB::ErrorType: 'static,
    {
        let main = blank(&root)?;
        let areas = main.split_evenly((1, self.panels.len().max(1)));
        for (panel, area) in self.panels.iter().zip(&areas) {
            draw_scan_panel(area, panel)?;
        }
        root.present().map_err(err)
    }
}

fn draw_scan_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    p: &ScanPanel,
) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    let (mut x0, mut x1, mut lo, mut hi) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for (_, pts) in &p.series {
        for &(x, y, e) in pts {
            x0 = x0.min(x);
            x1 = x1.max(x);
            lo = lo.min(y - e);
            hi = hi.max(y + e);
        }
    }
    if let Some((pts, _)) = &p.theory {
        for &(x, y) in pts {
            x0 = x0.min(x);
            x1 = x1.max(x);
            lo = lo.min(y);
            hi = hi.max(y);
        }
    }
    if x0 > x1 {
        return Err("no points to draw".into());
    }
    let pad = 0.05 * (x1 - x0).max(1e-3);
    // Headroom above the data for the legend.
    let (lo, hi) = (lo.min(0.0), hi + 0.5 * (hi - lo.min(0.0)).max(1e-3));
    let mut chart = ChartBuilder::on(area)
        .margin(pt(5.0) as u32)
        .x_label_area_size(pt(20.0) as u32)
        .y_label_area_size(pt(28.0) as u32)
        .build_cartesian_2d(x0 - pad..x1 + pad, lo..hi)
        .map_err(err)?;
    let (fx, fy) = (ticks(chart.x_range(), 5), ticks(chart.y_range(), 5));
    house_mesh(&mut chart.configure_mesh(), &p.x_label, &p.y_label, (5, 5))
        .x_label_formatter(&fx)
        .y_label_formatter(&fy)
        .draw()
        .map_err(err)?;
    let mut covered: Vec<(i32, i32)> = Vec::new();
    let mut labels: Vec<String> = Vec::new();
    if let Some((pts, label)) = &p.theory {
        covered.extend(line_pixels(chart.plotting_area(), pts));
        theory_line(&mut chart, pts.clone(), label, 0)?;
        labels.push(label.clone());
    }
    for (i, (label, pts)) in p.series.iter().enumerate() {
        let style = series(i);
        let color = style.color;
        labels.push(label.clone());
        let xy: Vec<(f64, f64)> = pts.iter().map(|q| (q.0, q.1)).collect();
        covered.extend(line_pixels(chart.plotting_area(), &xy));
        for &(x, y, e) in pts {
            covered.push(chart.plotting_area().map_coordinate(&(x, y + e)));
            covered.push(chart.plotting_area().map_coordinate(&(x, y - e)));
        }
        chart
            .draw_series(LineSeries::new(
                pts.iter().map(|q| (q.0, q.1)),
                color.stroke_width(2),
            ))
            .map_err(err)?
            .label(label.clone())
            .legend(move |c| legend_glyph(style, c));
        for &(x, y, e) in pts {
            chart
                .draw_series(std::iter::once(ErrorBar::new_vertical(
                    x,
                    y - e,
                    y,
                    y + e,
                    color.stroke_width(2),
                    pt(3.0) as u32,
                )))
                .map_err(err)?;
            marker(chart.plotting_area(), i, (x, y), false)?;
        }
    }
    let corner = legend_corner(&chart.plotting_area().get_pixel_range(), &covered, &labels);
    house_legend(&mut chart, corner)
}

/// Density histogram of values in [−1, 1] with `bins` equal bins.
pub fn histogram(values: &[f64], bins: usize) -> Vec<(f64, f64, f64)> {
    let w = 2.0 / bins as f64;
    let mut counts = vec![0usize; bins];
    for &v in values {
        let i = (((v + 1.0) / w).floor() as isize).clamp(0, bins as isize - 1) as usize;
        counts[i] += 1;
    }
    let total = values.len().max(1) as f64;
    counts
        .iter()
        .enumerate()
        .map(|(i, &c)| {
            let lo = -1.0 + i as f64 * w;
            (lo, lo + w, c as f64 / (total * w))
        })
        .collect()
}

/// The bin width for an overlap histogram of these values: Freedman–Diaconis, 2·IQR·N^{−1/3}
/// (Freedman & Diaconis, Z. Wahrscheinlichkeitstheorie 57, 453 (1981)), kept within
/// [0.02, 0.25]; with `lattice` = Some(s) (overlaps of ±1 states of size n lie on the lattice
/// 2k/n − 1, s = 2/n) a whole number of lattice steps, so every bin holds the same number of
/// possible values (a width that is not would make neighbouring bins alternate).
pub fn overlap_bin_width(values: &[f64], lattice: Option<f64>) -> f64 {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    let n = v.len().max(1) as f64;
    let q = |p: f64| {
        v.get(((v.len() as f64 - 1.0) * p).round() as usize)
            .copied()
            .unwrap_or(0.0)
    };
    let iqr = q(0.75) - q(0.25);
    let w = if iqr > 0.0 {
        2.0 * iqr / n.cbrt()
    } else {
        2.0 / n.sqrt()
    };
    let w = w.clamp(0.02, 0.25);
    match lattice {
        Some(s) if s > 0.0 => (w / s).round().max(1.0) * s,
        _ => w,
    }
}

/// Density histogram of values in [−1, 1] with bins of `width`; with a lattice spacing `s` the
/// edges sit half a step off the lattice values (from −1 − s/2), so no value falls on an edge.
pub fn histogram_width(values: &[f64], width: f64, lattice: Option<f64>) -> Vec<(f64, f64, f64)> {
    let start = -1.0 - lattice.map_or(0.0, |s| 0.5 * s);
    let bins = ((1.0 - start) / width).ceil().max(1.0) as usize + usize::from(lattice.is_some());
    let mut counts = vec![0usize; bins];
    for &v in values {
        let i = (((v - start) / width).floor() as isize).clamp(0, bins as isize - 1) as usize;
        counts[i] += 1;
    }
    let total = values.len().max(1) as f64;
    let mut out: Vec<(f64, f64, f64)> = counts
        .iter()
        .enumerate()
        .map(|(i, &c)| {
            let lo = start + i as f64 * width;
            (lo, lo + width, c as f64 / (total * width))
        })
        .collect();
    // Trailing empty bins beyond 1 carry nothing.
    while out.len() > 1 && out.last().is_some_and(|b| b.0 > 1.0 && b.2 == 0.0) {
        out.pop();
    }
    out
}

impl super::Figure for OverlapFigure {
    fn caption(&self) -> String {
        format!(
            "{}: left, the overlaps' histogram; right, their distribution function. {}",
            self.title, self.caption
        )
    }
    fn draw<DB: DrawingBackend>(&self, root: DrawingArea<DB, Shift>) -> Result<(), String>
    where
        DB::ErrorType: 'static,
    {
        let main = blank(&root)?;
        let (hist, cdf) = match &self.distribution {
            Some(_) => {
                let w = main.dim_in_pixel().0;
                let (a, b) = main.split_horizontally((w as f64 * 0.55) as u32);
                (a, Some(b))
            }
            None => (main, None),
        };
        self.draw_histogram(&hist)?;
        if let (Some(area), Some(d)) = (cdf, &self.distribution) {
            self.draw_distribution(&area, d)?;
        }
        root.present().map_err(err)
    }
}

impl OverlapFigure {
    fn draw_histogram<DB: DrawingBackend>(
        &self,
        main: &DrawingArea<DB, Shift>,
    ) -> Result<(), String>
    where
        DB::ErrorType: 'static,
    {
        let ymax = self
            .series
            .iter()
            .flat_map(|s| s.bins.iter().map(|b| b.2))
            .fold(0.0f64, f64::max)
            .max(1e-9);
        // Headroom above the bars: the legend sits there, off the data.
        let top = ymax * 2.1;
        let mut chart = ChartBuilder::on(main)
            .margin(pt(5.0) as u32)
            .x_label_area_size(pt(20.0) as u32)
            .y_label_area_size(pt(30.0) as u32)
            .build_cartesian_2d(-1.0f64..1.0f64, 0.0f64..top)
            .map_err(err)?;
        let (fx, fy) = (ticks(chart.x_range(), 5), ticks(chart.y_range(), 5));
        house_mesh(
            &mut chart.configure_mesh(),
            "overlap σᵃ·σᵇ/n",
            "density",
            (5, 5),
        )
        .x_label_formatter(&fx)
        .y_label_formatter(&fy)
        .draw()
        .map_err(err)?;
        let mut covered: Vec<(i32, i32)> = Vec::new();
        let mut labels: Vec<String> = Vec::new();
        if let Some((xs, label)) = &self.markers {
            labels.push(label.clone());
            for (k, &x) in xs.iter().enumerate() {
                covered.extend(line_pixels(
                    chart.plotting_area(),
                    &[(x, 0.0), (x, ymax * 1.05)],
                ));
                let drawn = chart
                    .draw_series(DashedLineSeries::new(
                        vec![(x, 0.0), (x, ymax * 1.05)],
                        pt(3.0) as u32,
                        pt(2.0) as u32,
                        BLACK.stroke_width(3),
                    ))
                    .map_err(err)?;
                if k == 0 {
                    drawn.label(label.clone()).legend(|(x, y)| {
                        PathElement::new(vec![(x, y), (x + 30, y)], BLACK.stroke_width(3))
                    });
                }
            }
        }
        for (i, s) in self.series.iter().enumerate() {
            let style = series(i);
            let color = style.color;
            let mut outline = vec![(-1.0, 0.0)];
            for &(lo, hi, d) in &s.bins {
                outline.push((lo, d));
                outline.push((hi, d));
            }
            outline.push((1.0, 0.0));
            covered.extend(line_pixels(chart.plotting_area(), &outline));
            labels.push(s.label.clone());
            chart
                .draw_series(LineSeries::new(outline, color.stroke_width(3)))
                .map_err(err)?
                .label(s.label.clone())
                .legend(move |c| legend_glyph(style, c));
        }
        let corner = legend_corner(&chart.plotting_area().get_pixel_range(), &covered, &labels);
        house_legend(&mut chart, corner)
    }

    fn draw_distribution<DB: DrawingBackend>(
        &self,
        area: &DrawingArea<DB, Shift>,
        d: &OverlapDistribution,
    ) -> Result<(), String>
    where
        DB::ErrorType: 'static,
    {
        let lo = d
            .samples
            .iter()
            .flatten()
            .fold(0.0f64, |a, &b| a.min(b))
            .max(-1.0);
        let mut chart = ChartBuilder::on(area)
            .margin(pt(5.0) as u32)
            .x_label_area_size(pt(20.0) as u32)
            .y_label_area_size(pt(22.0) as u32)
            .build_cartesian_2d(lo..1.0f64, 0.0f64..1.45)
            .map_err(err)?;
        let fx = ticks(chart.x_range(), 3);
        house_mesh(&mut chart.configure_mesh(), &d.axis, "P(≤ q)", (3, 4))
            .x_label_formatter(&fx)
            .y_label_formatter(&|y| {
                if *y <= 1.0 + 1e-9 {
                    format!("{y:.1}")
                } else {
                    String::new()
                }
            })
            .draw()
            .map_err(err)?;
        let (corners, label) = &d.parisi;
        let mut covered = line_pixels(chart.plotting_area(), corners);
        theory_line(&mut chart, corners.clone(), label, 0)?;
        for (i, v) in d.samples.iter().enumerate() {
            let style = series(i);
            let color = style.color;
            let cdf = empirical_cdf(v, lo);
            covered.extend(line_pixels(chart.plotting_area(), &cdf));
            chart
                .draw_series(LineSeries::new(cdf, color.stroke_width(3)))
                .map_err(err)?;
        }
        let corner = legend_corner(
            &chart.plotting_area().get_pixel_range(),
            &covered,
            std::slice::from_ref(label),
        );
        house_legend(&mut chart, corner)
    }
}

impl super::Figure for EnergyFigure {
    /// Panels (above [`PANELS_ABOVE`] series) take 0.62 of the figure's height per row.
    fn height(&self, size: super::Size) -> f64 {
        let h = size.inches().1;
        if self.series.len() > PANELS_ABOVE {
            h * 0.62 * self.series.len().div_ceil(2) as f64
        } else {
            h
        }
    }
    fn caption(&self) -> String {
        self.caption.clone()
    }
    fn draw<DB: DrawingBackend>(&self, root: DrawingArea<DB, Shift>) -> Result<(), String>
    where
        DB::ErrorType: 'static,
    {
        draw_energy(root, self)
    }
}

impl super::Figure for StabilityFigure {
    fn caption(&self) -> String {
        format!("{}. {}", self.title, self.caption)
    }
    fn draw<DB: DrawingBackend>(&self, root: DrawingArea<DB, Shift>) -> Result<(), String>
    where
        DB::ErrorType: 'static,
    {
        draw_stability(root, self)
    }
}

/// Greedy word wrap at `width` characters.
pub(crate) fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut lines = vec![String::new()];
    for word in text.split_whitespace() {
        let last = lines.last_mut().expect("one line");
        if !last.is_empty() && last.chars().count() + 1 + word.chars().count() > width {
            lines.push(word.to_string());
        } else {
            if !last.is_empty() {
                last.push(' ');
            }
            last.push_str(word);
        }
    }
    lines
}

/// Clears the drawing to white and returns it: the image holds axes, data and legend only;
/// the caption goes to the figure's `.tex` and `.csv` sidecars ([`super::Figure::caption`]).
fn blank<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
) -> Result<DrawingArea<DB, Shift>, String> {
    root.fill(&WHITE).map_err(err)?;
    Ok(root.clone())
}

/// The corners of a marker's outline around the origin, in pixels, for half-width r (the
/// circle as a 20-gon, so every marker is one polygon), closed (the first corner repeated).
fn outline_corners(outline: Outline, r: i32) -> Vec<(i32, i32)> {
    let mut pts = match outline {
        Outline::Circle => (0..20)
            .map(|k| {
                let t = k as f64 * std::f64::consts::TAU / 20.0;
                (
                    (r as f64 * t.cos()).round() as i32,
                    (r as f64 * t.sin()).round() as i32,
                )
            })
            .collect(),
        Outline::Square => vec![
            (-r + 1, -r + 1),
            (r - 1, -r + 1),
            (r - 1, r - 1),
            (-r + 1, r - 1),
        ],
        Outline::Triangle => {
            let h = r + 2;
            vec![(0, -h), (h, h * 2 / 3), (-h, h * 2 / 3)]
        }
        Outline::Diamond => {
            let h = r + 1;
            vec![(0, -h), (h, 0), (0, h), (-h, 0)]
        }
    };
    pts.push(pts[0]);
    pts
}

/// A series' marker around one point, drawn in pixels (so it looks the same in data
/// coordinates and in a legend): its fill (the colour, or white when open) and its outline,
/// after a line sample through it when `line` (legend entries). `open` forces the open
/// variant (extrapolated points).
struct Glyph<C> {
    at: C,
    style: SeriesStyle,
    line: bool,
    r: i32,
    open: bool,
}

impl<'a, C: 'a> PointCollection<'a, C> for &'a Glyph<C> {
    type Point = &'a C;
    type IntoIter = std::iter::Once<&'a C>;
    fn point_iter(self) -> Self::IntoIter {
        std::iter::once(&self.at)
    }
}

impl<C, DB: DrawingBackend> Drawable<DB> for Glyph<C> {
    fn draw<I: Iterator<Item = (i32, i32)>>(
        &self,
        mut pos: I,
        backend: &mut DB,
        _: (u32, u32),
    ) -> Result<(), DrawingErrorKind<DB::ErrorType>> {
        let Some((x, y)) = pos.next() else {
            return Ok(());
        };
        let c = self.style.color;
        if self.line {
            backend.draw_line((x - 15, y), (x + 15, y), &c.stroke_width(3))?;
        }
        let fill = if self.style.shape.filled && !self.open {
            c.filled()
        } else {
            WHITE.filled()
        };
        let closed: Vec<(i32, i32)> = outline_corners(self.style.shape.outline, self.r)
            .into_iter()
            .map(|(dx, dy)| (x + dx, y + dy))
            .collect();
        backend.fill_polygon(closed[..closed.len() - 1].iter().copied(), &fill)?;
        backend.draw_path(closed.iter().copied(), &c.stroke_width(3))
    }
}

/// A legend entry: a line sample with the series' marker on it.
fn legend_glyph(style: SeriesStyle, (x, y): (i32, i32)) -> Glyph<(i32, i32)> {
    #[cfg(test)]
    LEGEND_STYLES.with(|c| c.borrow_mut().push(style));
    Glyph {
        at: (x + 15, y),
        style,
        line: true,
        r: pt(2.0) as i32,
        open: false,
    }
}

/// Series i's marker at a data point (`open`: the open variant, larger, for an extrapolated
/// point).
fn marker<DB: DrawingBackend>(
    area: &DrawingArea<
        DB,
        plotters::coord::cartesian::Cartesian2d<
            impl Ranged<ValueType = f64>,
            impl Ranged<ValueType = f64>,
        >,
    >,
    i: usize,
    (x, y): (f64, f64),
    open: bool,
) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    area.draw(&Glyph {
        at: (x, y),
        style: series(i),
        line: false,
        r: pt(if open { 2.8 } else { 2.2 }) as i32,
        open,
    })
    .map_err(err)
}

/// Draws the energy figure.
pub fn draw_energy<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    fig: &EnergyFigure,
) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    let main = blank(&root)?;
    let xs = |n: f64| n.powf(-fig.omega);
    let xmax = fig
        .series
        .iter()
        .flat_map(|s| s.points.iter().map(|p| xs(p.0)))
        .fold(0.0, f64::max)
        * 1.08;
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for s in &fig.series {
        for p in &s.points {
            lo = lo.min(p.1 - p.2);
            hi = hi.max(p.1 + p.2);
        }
        if let Some(f) = &s.fit {
            lo = lo.min(f.e_inf - f.e_inf_se);
            hi = hi.max(f.e_inf + f.e_inf_se);
        }
    }
    for (v, _) in &fig.theory {
        lo = lo.min(*v);
        hi = hi.max(*v);
    }
    let pad = 0.08 * (hi - lo).max(1e-3);
    let (lo, mut hi) = (lo - pad, hi + 2.5 * pad);
    let count = fig.series.len();
    if count <= PANELS_ABOVE {
        // Headroom for the legend: the top of the range is raised until a legend box of every
        // entry fits above all the data (estimated as `legend_corner` does), so one of the
        // upper corners is always free; `legend_corner` then chooses among the corners.
        let (_, h) = main.dim_in_pixel();
        let plot_h = h as f64 - pt(13.0 + 5.0 + 20.0);
        let entries = (count + fig.theory.len()) as f64;
        let box_h = entries * 1.3 * pt(6.5) + 20.0 + pt(3.0);
        let f = (box_h / plot_h).min(0.6);
        let top = hi - 2.5 * pad + pad;
        hi = hi.max((top - f * lo) / (1.0 - f));
    }
    if count > PANELS_ABOVE {
        // One panel per series, shared axes (the same ranges), two columns; the y description
        // once, down the left edge, the x description under the bottom row, the sizes over the
        // top row, the theory lines' legend in the first panel.
        let rows = count.div_ceil(2);
        let (strip, grid) = main.split_horizontally(pt(11.0) as u32);
        let style = TextStyle::from(("sans-serif", pt(8.0)).into_font())
            .color(&BLACK)
            .transform(FontTransform::Rotate270);
        let text = ENERGY_AXIS;
        let (w, _) = strip.estimate_text_size(text, &style).map_err(err)?;
        let (_, h) = strip.dim_in_pixel();
        strip
            .draw_text(text, &style, (pt(2.0) as i32, (h as i32 + w as i32) / 2))
            .map_err(err)?;
        // Columns and rows split one at a time (exact halves of this area).
        let (w, h) = grid.dim_in_pixel();
        let (left, right) = grid.split_horizontally(w / 2);
        let cells: Vec<DrawingArea<DB, Shift>> = (0..rows)
            .flat_map(|r| {
                let y0 = (h as usize * r / rows) as i32;
                let y1 = (h as usize * (r + 1) / rows) as i32;
                [
                    left.clone().shrink((0, y0), (w / 2, (y1 - y0) as u32)),
                    right.clone().shrink((0, y0), (w - w / 2, (y1 - y0) as u32)),
                ]
            })
            .collect();
        for (j, area) in cells.iter().enumerate() {
            if j < count {
                let role = Role {
                    title: true,
                    y_desc: false,
                    x_desc: j + 2 >= count,
                    sizes: true,
                    theory_legend: j == 0,
                };
                energy_panel(area, fig, &[j], (xmax, lo, hi), role)?;
            }
        }
    } else {
        let all: Vec<usize> = (0..count).collect();
        let role = Role {
            title: false,
            y_desc: true,
            x_desc: true,
            sizes: true,
            theory_legend: true,
        };
        energy_panel(&main, fig, &all, (xmax, lo, hi), role)?;
    }
    root.present().map_err(err)
}

/// The energy axis' description (the sign convention with it: kiln maximises H).
const ENERGY_AXIS: &str = "energy per spin H/n (maximised)";

/// What one panel of the energy figure draws besides its data.
#[derive(Clone, Copy)]
struct Role {
    /// A panel: its series named in a title line above the plot, not in a legend.
    title: bool,
    y_desc: bool,
    x_desc: bool,
    sizes: bool,
    theory_legend: bool,
}

/// Above this many series the energy figure is drawn as panels, one per series.
pub const PANELS_ABOVE: usize = 4;

/// One plot of the energy figure on `main`: the series `which` (indices into `fig.series`,
/// which keep their styles) and every theory line, on the axes (n^-ω from 0 to `xmax`, energy
/// from `lo` to `hi`) shared by all panels.
fn energy_panel<DB: DrawingBackend>(
    main: &DrawingArea<DB, Shift>,
    fig: &EnergyFigure,
    which: &[usize],
    (xmax, lo, hi): (f64, f64, f64),
    role: Role,
) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    let xs = |n: f64| n.powf(-fig.omega);
    let mut chart = ChartBuilder::on(main)
        .margin(pt(5.0) as u32)
        // Room above the plot for the sizes run (a second axis in n), and in a panel for its
        // title above them.
        .margin_top(pt(if role.title { 24.0 } else { 13.0 }) as u32)
        .x_label_area_size(pt(20.0) as u32)
        .y_label_area_size(pt(30.0) as u32)
        // A margin left of n^-ω = 0, so the extrapolated points are drawn whole.
        .build_cartesian_2d(-0.04 * xmax..xmax, lo..hi)
        .map_err(err)?;
    let (fx, fy) = (ticks(chart.x_range(), 5), ticks(chart.y_range(), 6));
    house_mesh(
        &mut chart.configure_mesh(),
        "",
        if role.y_desc { ENERGY_AXIS } else { "" },
        (5, 6),
    )
    .x_label_formatter(&fx)
    .y_label_formatter(&fy)
    .draw()
    .map_err(err)?;
    if role.x_desc {
        power_label(main, chart.plotting_area().get_pixel_range(), fig.omega)?;
    }
    let mut sizes: Vec<u64> = fig
        .series
        .iter()
        .flat_map(|s| s.points.iter().map(|p| p.0 as u64))
        .collect();
    sizes.sort_unstable();
    sizes.dedup();
    let at: Vec<(i32, u64)> = sizes
        .iter()
        .map(|&n| {
            (
                chart.plotting_area().map_coordinate(&(xs(n as f64), hi)).0,
                n,
            )
        })
        .collect();
    if role.sizes {
        n_axis(main, chart.plotting_area().get_pixel_range(), &at)?;
    }
    // What the legend must not cover: every drawn point and line, in pixels.
    let mut drawn: Vec<(i32, i32)> = Vec::new();
    let mut labels: Vec<String> = Vec::new();
    for (k, (v, label)) in fig.theory.iter().enumerate() {
        if role.theory_legend {
            theory_line(&mut chart, vec![(0.0, *v), (xmax, *v)], label, k)?;
            labels.push(label.clone());
        } else {
            dashed(&mut chart, vec![(0.0, *v), (xmax, *v)], k)?;
        }
        drawn.extend((0..=40).map(|k| {
            chart
                .plotting_area()
                .map_coordinate(&(xmax * k as f64 / 40.0, *v))
        }));
    }
    for (i, s) in fig.series.iter().enumerate() {
        if !which.contains(&i) {
            continue;
        }
        let style = series(i);
        let color = style.color;
        if let Some(f) = &s.fit {
            // The fit's own x is n^-ω_fit = x^(ω_fit/ω) on this axis (the same x when the
            // series was fitted at the axis' ω).
            let at = |x: f64| {
                if f.omega == fig.omega {
                    f.at(x)
                } else {
                    f.at(x.powf(f.omega / fig.omega))
                }
            };
            let grid: Vec<f64> = (0..=60).map(|k| xmax * k as f64 / 60.0).collect();
            let mut band: Vec<(f64, f64)> = grid
                .iter()
                .map(|&x| {
                    let (y, e) = at(x);
                    (x, y + e)
                })
                .collect();
            band.extend(grid.iter().rev().map(|&x| {
                let (y, e) = at(x);
                (x, y - e)
            }));
            chart
                .draw_series(std::iter::once(Polygon::new(
                    band,
                    color.mix(0.22).filled(),
                )))
                .map_err(err)?;
            let fitted = chart
                .draw_series(LineSeries::new(
                    grid.iter().map(|&x| (x, at(x).0)),
                    color.stroke_width(3),
                ))
                .map_err(err)?;
            let e = with_error(f.e_inf, f.e_inf_se).replace('-', "\u{2212}");
            let l = format!("{}: e∞ = {e}", s.label);
            if role.title {
                panel_title(main, style, &l)?;
            } else {
                labels.push(l.clone());
                fitted.label(l).legend(move |c| legend_glyph(style, c));
            }
            drawn.extend(
                grid.iter()
                    .map(|&x| chart.plotting_area().map_coordinate(&(x, at(x).0))),
            );
            drawn.push(chart.plotting_area().map_coordinate(&(0.0, f.e_inf)));
            chart
                .draw_series(std::iter::once(ErrorBar::new_vertical(
                    0.0,
                    f.e_inf - f.e_inf_se,
                    f.e_inf,
                    f.e_inf + f.e_inf_se,
                    color.stroke_width(3),
                    pt(4.0) as u32,
                )))
                .map_err(err)?;
            marker(chart.plotting_area(), i, (0.0, f.e_inf), true)?;
        } else if role.title {
            panel_title(main, style, &s.label)?;
        } else {
            // No fit (too few sizes, say): the series is still named, by its marker.
            labels.push(s.label.clone());
            chart
                .draw_series(LineSeries::new(std::iter::empty::<(f64, f64)>(), color))
                .map_err(err)?
                .label(s.label.clone())
                .legend(move |c| legend_glyph(style, c));
        }
        for p in &s.points {
            let x = xs(p.0);
            chart
                .draw_series(std::iter::once(ErrorBar::new_vertical(
                    x,
                    p.1 - p.2,
                    p.1,
                    p.1 + p.2,
                    color.stroke_width(2),
                    pt(3.0) as u32,
                )))
                .map_err(err)?;
            marker(chart.plotting_area(), i, (x, p.1), false)?;
            drawn.push(chart.plotting_area().map_coordinate(&(x, p.1)));
        }
    }
    if labels.is_empty() {
        return Ok(());
    }
    let corner = legend_corner(&chart.plotting_area().get_pixel_range(), &drawn, &labels);
    house_legend(&mut chart, corner)
}

/// A panel's title in its top margin: the series' line sample and marker, then its text.
fn panel_title<DB: DrawingBackend>(
    main: &DrawingArea<DB, Shift>,
    style: SeriesStyle,
    text: &str,
) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    #[cfg(test)]
    LEGEND_STYLES.with(|c| c.borrow_mut().push(style));
    let y = pt(9.0) as i32;
    let x = pt(12.0) as i32;
    main.draw(&Glyph {
        at: (x, y),
        style,
        line: true,
        r: pt(2.0) as i32,
        open: false,
    })
    .map_err(err)?;
    let font = TextStyle::from(("sans-serif", pt(6.5)).into_font()).color(&BLACK);
    let (_, h) = main.estimate_text_size(text, &font).map_err(err)?;
    main.draw_text(text, &font, (x + pt(7.0) as i32, y - h as i32 / 2))
        .map_err(err)
}

/// Draws a stability figure: distance against ε, log–log, one curve per size.
pub fn draw_stability<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    fig: &StabilityFigure,
) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    let main = blank(&root)?;
    let pos: Vec<&(f64, f64, f64)> = fig
        .series
        .iter()
        .flat_map(|s| s.points.iter().chain(&s.before_rounding))
        .filter(|p| p.0 > 0.0 && p.1 > 0.0)
        .collect();
    if pos.is_empty() {
        return Err("no positive distances to draw".into());
    }
    let (xlo, xhi) = pos
        .iter()
        .fold((f64::MAX, 0.0f64), |(l, h), p| (l.min(p.0), h.max(p.0)));
    let ylo = pos
        .iter()
        .fold(f64::MAX, |l, p| l.min((p.1 - p.2).max(p.1 * 0.5)));
    // A distance between two outputs of norm √n is at most 2: the axis ends there, with the
    // line at √2 (two unrelated outputs, overlap 0) inside it.
    let (ylo, yhi) = ((ylo / 1.3).min(1.0), 2.0);
    let (xlo, xhi) = (xlo / 1.6, xhi * 1.6);
    let mut chart = ChartBuilder::on(&main)
        .margin(pt(5.0) as u32)
        .x_label_area_size(pt(20.0) as u32)
        .y_label_area_size(pt(30.0) as u32)
        .build_cartesian_2d(
            (xlo..xhi).log_scale().with_key_points(log_ticks(xlo, xhi)),
            (ylo..yhi).log_scale().with_key_points(log_ticks(ylo, yhi)),
        )
        .map_err(err)?;
    house_mesh(
        &mut chart.configure_mesh(),
        "ε (disorder correlation 1 − ε)",
        if fig.modulo_flip {
            "distance min ‖σ ∓ σ'‖/√n"
        } else {
            "distance ‖σ − σ'‖/√n"
        },
        (4, 5),
    )
    .x_label_formatter(&|x| format!("{}", (x * 1e6).round() / 1e6))
    .y_label_formatter(&|y| format!("{}", (y * 1e4).round() / 1e4))
    .draw()
    .map_err(err)?;
    let mut drawn: Vec<(i32, i32)> = Vec::new();
    let mut labels: Vec<String> = Vec::new();
    for (i, s) in fig.series.iter().enumerate() {
        let style = series(i);
        let color = style.color;
        let pts: Vec<(f64, f64, f64)> = s
            .points
            .iter()
            .copied()
            .filter(|p| p.0 > 0.0 && p.1 > 0.0)
            .collect();
        let label = match s.slope.filter(Slope::printable) {
            Some(k) => format!("{}  (slope {})", s.label, with_error(k.slope, k.se)),
            None => s.label.clone(),
        };
        labels.push(label.clone());
        chart
            .draw_series(LineSeries::new(
                pts.iter().map(|p| (p.0, p.1)),
                color.stroke_width(3),
            ))
            .map_err(err)?
            .label(label)
            .legend(move |c| legend_glyph(style, c));
        for p in &pts {
            chart
                .draw_series(std::iter::once(ErrorBar::new_vertical(
                    p.0,
                    (p.1 - p.2).max(p.1 * 0.5),
                    p.1,
                    p.1 + p.2,
                    color.stroke_width(2),
                    pt(3.0) as u32,
                )))
                .map_err(err)?;
            marker(chart.plotting_area(), i, (p.0, p.1), false)?;
            drawn.push(chart.plotting_area().map_coordinate(&(p.0, p.1)));
            drawn.push(chart.plotting_area().map_coordinate(&(p.0, p.1 + p.2)));
        }
        // Before rounding: the same colour and marker, open, on a dotted line.
        let before: Vec<(f64, f64)> = s
            .before_rounding
            .iter()
            .filter(|p| p.0 > 0.0 && p.1 > 0.0)
            .map(|p| (p.0, p.1))
            .collect();
        chart
            .draw_series(DashedLineSeries::new(
                before.clone(),
                pt(1.0) as u32,
                pt(1.5) as u32,
                color.stroke_width(2),
            ))
            .map_err(err)?;
        for p in &before {
            marker(chart.plotting_area(), i, *p, true)?;
            drawn.push(chart.plotting_area().map_coordinate(p));
        }
    }
    if fig.series.iter().any(|s| !s.before_rounding.is_empty()) {
        let text = "dotted, open: before rounding";
        labels.push(text.into());
        chart
            .draw_series(LineSeries::new(std::iter::empty::<(f64, f64)>(), BLACK))
            .map_err(err)?
            .label(text)
            .legend(|(x, y)| {
                EmptyElement::at((x, y))
                    + PathElement::new(vec![(0, 0), (4, 0)], BLACK.stroke_width(2))
                    + PathElement::new(vec![(10, 0), (14, 0)], BLACK.stroke_width(2))
                    + PathElement::new(vec![(20, 0), (24, 0)], BLACK.stroke_width(2))
            });
    }
    let root2 = std::f64::consts::SQRT_2;
    theory_line(
        &mut chart,
        vec![(xlo, root2), (xhi, root2)],
        "√2: unrelated outputs",
        0,
    )?;
    labels.push("√2: unrelated outputs".into());
    for k in 0..=40 {
        let x = xlo * (xhi / xlo).powf(k as f64 / 40.0);
        drawn.push(chart.plotting_area().map_coordinate(&(x, root2)));
    }
    let corner = legend_corner(&chart.plotting_area().get_pixel_range(), &drawn, &labels);
    house_legend(&mut chart, corner)?;
    root.present().map_err(err)
}

/// The sizes run, as a second axis along the top of the energy figure: a tick at each n's
/// position n^{−ω} (pixel x in `at`) and its value above it, values that would touch the one
/// to their left left out (the largest n, leftmost, always shown), and "n =" before the first.
fn n_axis<DB: DrawingBackend>(
    main: &DrawingArea<DB, Shift>,
    plot: (std::ops::Range<i32>, std::ops::Range<i32>),
    at: &[(i32, u64)],
) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    let font = pt(6.5);
    let style = TextStyle::from(("sans-serif", font).into_font()).color(&BLACK);
    // `plot` and `at` are in the backend's pixels; this area draws relative to its corner.
    let (bx, by) = main.get_base_pixel();
    let top = plot.1.start - by;
    let at: Vec<(i32, u64)> = at.iter().map(|&(x, n)| (x - bx, n)).collect();
    let tick = pt(2.5) as i32;
    let size = |t: &str| main.estimate_text_size(t, &style).map_err(err);
    // From the left (largest n, x nearest 0) to the right: keep a label when it clears the
    // last one kept.
    let mut sorted: Vec<(i32, u64)> = at;
    sorted.sort_by_key(|p| p.0);
    let gap = (0.4 * font) as i32;
    let mut right_edge = i32::MIN;
    let mut first_left = None;
    for &(x, n) in &sorted {
        main.draw(&PathElement::new(
            vec![(x, top), (x, top - tick)],
            BLACK.stroke_width(2),
        ))
        .map_err(err)?;
        let text = n.to_string();
        let (w, h) = size(&text)?;
        let left = x - w as i32 / 2;
        if left > right_edge + gap {
            main.draw_text(&text, &style, (left, top - tick - 2 - h as i32))
                .map_err(err)?;
            right_edge = left + w as i32;
            first_left.get_or_insert(left);
        }
    }
    // The axis' name before its first value, where the plot's top-left corner leaves room.
    if let Some(left) = first_left {
        let (w, h) = size("n =")?;
        main.draw_text(
            "n =",
            &style,
            (left - 2 * gap - w as i32, top - tick - 2 - h as i32),
        )
        .map_err(err)?;
    }
    Ok(())
}

/// The energy figure's x-axis description, n^{−ω} with a real superscript (the exponent drawn
/// smaller and raised) and the value of ω, centred under the plotting area `plot` (pixels).
fn power_label<DB: DrawingBackend>(
    main: &DrawingArea<DB, Shift>,
    plot: (std::ops::Range<i32>, std::ops::Range<i32>),
    omega: f64,
) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    let base = TextStyle::from(("sans-serif", pt(8.0)).into_font()).color(&BLACK);
    let small = TextStyle::from(("sans-serif", pt(5.5)).into_font()).color(&BLACK);
    let pieces = [
        ("n", &base, 0),
        ("\u{2212}ω", &small, -(pt(3.0) as i32)),
        (&*format!(", ω = {omega:.3}"), &base, 0),
    ];
    let widths: Vec<i32> = pieces
        .iter()
        .map(|(t, f, _)| {
            main.estimate_text_size(t, f)
                .map(|w| w.0 as i32)
                .map_err(err)
        })
        .collect::<Result<_, _>>()?;
    let total: i32 = widths.iter().sum();
    // `plot` is in the backend's pixels; this area draws relative to its corner.
    let (bx, by) = main.get_base_pixel();
    let mut x = (plot.0.start + plot.0.end) / 2 - total / 2 - bx;
    let y = plot.1.end + pt(13.0) as i32 - by;
    for ((text, style, dy), w) in pieces.iter().zip(&widths) {
        main.draw_text(text, style, (x, y + dy)).map_err(err)?;
        x += w;
    }
    Ok(())
}

/// The spacing of the labelled ticks plotters draws on a linear axis from `lo` to `hi` with at
/// most `count` labels (its own search, restated: start from the power of ten below the range,
/// then divide by 2, 5 and 10 while the ticks still number at most `count`).
fn tick_step(lo: f64, hi: f64, count: usize) -> f64 {
    let (a, b) = (lo.min(hi), hi.max(lo));
    if !(b - a).is_finite() || (b - a).abs() < f64::EPSILON || count == 0 {
        return 1.0;
    }
    let rem = |x: f64, m: f64| {
        let r = x - (x / m).floor() * m;
        if (r - m).abs() < f64::EPSILON { 0.0 } else { r }
    };
    let mut scale = 10f64.powf((b - a).log10().floor());
    if 1 + ((b - a) / scale).floor() as usize > count {
        scale *= 10.0;
    }
    for _ in 0..64 {
        let old = scale;
        for nxt in [2.0, 5.0, 10.0] {
            let mut left = a - rem(a, old / nxt);
            if left < a {
                left += old / nxt;
            }
            let right = b - rem(b, old / nxt);
            if (1.0 + (right - left) / old * nxt).round() as usize > count {
                return scale;
            }
            scale = old / nxt;
        }
        scale = old / 10.0;
    }
    scale
}

/// Tick labels for a linear axis over `range` (read from the chart) with at most `count` ticks: every label with
/// the same number of decimals (those of the tick step plotters chooses, a 1, 2 or 5 times a
/// power of ten), negative values with a true minus sign (U+2212), and no "−0".
pub(crate) fn ticks(range: std::ops::Range<f64>, count: usize) -> impl Fn(&f64) -> String {
    let step = tick_step(range.start, range.end, count);
    let decimals = (-(step.log10() + 1e-9).floor()).max(0.0) as usize;
    move |v: &f64| {
        let text = format!("{:.*}", decimals, v);
        let zero = text
            .trim_start_matches('-')
            .chars()
            .all(|c| c == '0' || c == '.');
        if zero {
            text.trim_start_matches('-').to_string()
        } else {
            text.replace('-', "\u{2212}")
        }
    }
}

/// The axes every kiln figure shares: no grid, 7 pt tick labels, 8 pt axis titles, 2 px black
/// axes, and the given titles and tick counts.
fn house_mesh<'m, 'a, 'b, X, Y, DB>(
    mesh: &'m mut MeshStyle<'a, 'b, X, Y, DB>,
    x_desc: &str,
    y_desc: &str,
    (x_labels, y_labels): (usize, usize),
) -> &'m mut MeshStyle<'a, 'b, X, Y, DB>
where
    X: Ranged,
    Y: Ranged,
    DB: DrawingBackend,
{
    mesh.disable_x_mesh()
        .disable_y_mesh()
        .x_labels(x_labels)
        .y_labels(y_labels)
        .x_desc(x_desc)
        .y_desc(y_desc)
        .label_style(("sans-serif", pt(7.0)))
        .axis_desc_style(("sans-serif", pt(8.0)))
        .axis_style(BLACK.stroke_width(2))
}

/// A black theory line through `pts` in dash pattern `pattern` (see [`dashed`]), with its
/// legend entry drawn in the same pattern.
fn theory_line<'a, DB, X, Y>(
    chart: &mut ChartContext<'a, DB, plotters::coord::cartesian::Cartesian2d<X, Y>>,
    pts: Vec<(f64, f64)>,
    label: &str,
    pattern: usize,
) -> Result<(), String>
where
    DB: DrawingBackend + 'a,
    DB::ErrorType: 'static,
    X: Ranged<ValueType = f64>,
    Y: Ranged<ValueType = f64>,
{
    dashed(chart, pts, pattern)?
        .label(label.to_string())
        .legend(move |(x, y)| {
            // In the line's own pattern: three dashes, or six dots for a second line.
            let seg: [(i32, i32); 6] = if pattern == 0 {
                [(0, 4), (4, 8), (12, 16), (16, 20), (24, 27), (27, 30)]
            } else {
                [(0, 2), (5, 7), (10, 12), (15, 17), (20, 22), (25, 27)]
            };
            let piece = |k: usize| {
                PathElement::new(vec![(seg[k].0, 0), (seg[k].1, 0)], BLACK.stroke_width(3))
            };
            EmptyElement::at((x, y))
                + piece(0)
                + piece(1)
                + piece(2)
                + piece(3)
                + piece(4)
                + piece(5)
        });
    Ok(())
}

/// A black reference line through `pts`, as theory lines are drawn (without a legend entry;
/// [`theory_line`] adds one): dashed for `pattern` 0, dotted otherwise, so that two theory
/// lines in one figure (the Parisi value and the algorithmic threshold) differ in grey too.
fn dashed<'a, 'b, DB, X, Y>(
    chart: &'b mut ChartContext<'a, DB, plotters::coord::cartesian::Cartesian2d<X, Y>>,
    pts: Vec<(f64, f64)>,
    pattern: usize,
) -> Result<&'b mut plotters::chart::SeriesAnno<'a, DB>, String>
where
    DB: DrawingBackend + 'a,
    DB::ErrorType: 'static,
    X: Ranged<ValueType = f64>,
    Y: Ranged<ValueType = f64>,
{
    chart
        .draw_series(DashedLineSeries::new(
            pts,
            pt(if pattern == 0 { 3.0 } else { 0.8 }) as u32,
            pt(if pattern == 0 { 2.0 } else { 1.6 }) as u32,
            BLACK.stroke_width(3),
        ))
        .map_err(err)
}

/// The corner of the plotting area `range` (pixels) where a legend box of `labels` covers the
/// fewest of the drawn points `pts` (pixels); ties go to the first of upper right, upper left,
/// lower right, lower left. The box is estimated from the legend's font: one line per label,
/// the longest label's width plus the line sample.
fn legend_corner(
    range: &(std::ops::Range<i32>, std::ops::Range<i32>),
    pts: &[(i32, i32)],
    labels: &[String],
) -> SeriesLabelPosition {
    let font = pt(6.5);
    let chars = labels.iter().map(|l| l.chars().count()).max().unwrap_or(0) as f64;
    let (w, h) = (
        (60.0 + chars * 0.56 * font) as i32,
        (labels.len() as f64 * 1.3 * font + 20.0) as i32,
    );
    let (x, y) = range;
    let corners = [
        (
            SeriesLabelPosition::UpperRight,
            x.end - w..x.end,
            y.start..y.start + h,
        ),
        (
            SeriesLabelPosition::UpperLeft,
            x.start..x.start + w,
            y.start..y.start + h,
        ),
        (
            SeriesLabelPosition::LowerRight,
            x.end - w..x.end,
            y.end - h..y.end,
        ),
        (
            SeriesLabelPosition::LowerLeft,
            x.start..x.start + w,
            y.end - h..y.end,
        ),
    ];
    let covered = |(bx, by): &(std::ops::Range<i32>, std::ops::Range<i32>)| {
        pts.iter()
            .filter(|(px, py)| bx.contains(px) && by.contains(py))
            .count()
    };
    let (corner, count) = corners
        .into_iter()
        .map(|(c, bx, by)| (c, covered(&(bx, by))))
        .min_by_key(|c| c.1)
        .expect("four corners");
    #[cfg(test)]
    LEGEND_COVERS.with(|c| c.borrow_mut().push(count));
    let _ = count;
    corner
}

#[cfg(test)]
thread_local! {
    /// The series styles legend entries were drawn with on this thread (read by the grey test).
    static LEGEND_STYLES: std::cell::RefCell<Vec<SeriesStyle>> = const { std::cell::RefCell::new(Vec::new()) };
    /// How many drawn points each legend placed on this thread covers (by the estimated box):
    /// read by the render tests.
    static LEGEND_COVERS: std::cell::RefCell<Vec<usize>> = const { std::cell::RefCell::new(Vec::new()) };
}

/// The pixels a polyline through `pts` (data coordinates) covers, sampled every few pixels
/// along each segment: what a legend placed by [`legend_corner`] must not hide.
fn line_pixels<DB, X, Y>(
    area: &DrawingArea<DB, plotters::coord::cartesian::Cartesian2d<X, Y>>,
    pts: &[(f64, f64)],
) -> Vec<(i32, i32)>
where
    DB: DrawingBackend,
    X: Ranged<ValueType = f64>,
    Y: Ranged<ValueType = f64>,
{
    let px: Vec<(i32, i32)> = pts.iter().map(|p| area.map_coordinate(p)).collect();
    let mut out = Vec::new();
    for w in px.windows(2) {
        let ((x0, y0), (x1, y1)) = (w[0], w[1]);
        let steps = ((x1 - x0).abs().max((y1 - y0).abs()) / 4).max(1);
        for k in 0..steps {
            out.push((x0 + (x1 - x0) * k / steps, y0 + (y1 - y0) * k / steps));
        }
    }
    out.extend(px.last());
    out
}

/// The legend box every figure uses.
fn house_legend<'a, DB, CT>(
    chart: &mut ChartContext<'a, DB, CT>,
    position: SeriesLabelPosition,
) -> Result<(), String>
where
    DB: DrawingBackend + 'a,
    DB::ErrorType: 'static,
    CT: plotters::coord::CoordTranslate,
{
    chart
        .configure_series_labels()
        .position(position)
        .label_font(("sans-serif", pt(6.5)))
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .draw()
        .map_err(err)
}

/// Tick values for a log axis from `lo` to `hi`: the powers of ten inside, and also 2 and 5
/// times them when the axis spans less than two decades, so that a short axis still shows
/// several labelled values.
fn log_ticks(lo: f64, hi: f64) -> Vec<f64> {
    let mantissas: &[f64] = if hi / lo < 100.0 {
        &[1.0, 2.0, 5.0]
    } else {
        &[1.0]
    };
    let mut out = Vec::new();
    let mut e = lo.log10().floor() as i32;
    while 10f64.powi(e) <= hi {
        for &m in mantissas {
            let v = m * 10f64.powi(e);
            if v >= lo && v <= hi {
                out.push(v);
            }
        }
        e += 1;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// An axis from 0.25 to 4 (the stability figures' distances span less than two decades)
    /// gets 0.5, 1 and 2 as labelled ticks, not only 1; a longer one keeps the decades.
    #[test]
    fn log_ticks_label_short_axes() {
        assert_eq!(log_ticks(0.25, 4.0), vec![0.5, 1.0, 2.0]);
        assert_eq!(log_ticks(0.006, 0.33), vec![0.01, 0.02, 0.05, 0.1, 0.2]);
        assert_eq!(log_ticks(0.0006, 0.17), vec![0.001, 0.01, 0.1]);
        assert!(log_ticks(3.0, 4.0).is_empty());
    }

    /// An exact power law gives its exponent with χ² = 0; the slope is printed only with at
    /// least three points, a straight-line fit, and a slope clear of 0; its error is the
    /// weighted-least-squares one (checked against the closed form for equal weights:
    /// σ/sqrt(Σ(x − x̄)²) in log ε).
    #[test]
    fn slopes() {
        let law = |e: f64| 2.0 * e.powf(0.5);
        let pts: Vec<(f64, f64, f64)> = [0.01, 0.1, 1.0]
            .iter()
            .map(|&e: &f64| (e, law(e), 0.02 * law(e)))
            .collect();
        let f = loglog_fit(&pts).unwrap();
        assert!((f.slope - 0.5).abs() < 1e-12 && f.chi2 < 1e-20 && f.dof == 1);
        let sxx: f64 = [-1.0f64, 0.0, 1.0]
            .iter()
            .map(|d| (d * 10f64.ln()).powi(2))
            .sum();
        assert!((f.se - 0.02 / sxx.sqrt()).abs() < 1e-12, "{f:?}");
        assert!(f.printable());
        // Two points: a slope, but not printed (no degree of freedom to judge the line).
        assert!(!loglog_fit(&pts[..2]).unwrap().printable());
        assert_eq!(loglog_fit(&pts[..1]), None);
        // Flat within errors: not printed.
        let flat: Vec<(f64, f64, f64)> = [0.01, 0.1, 1.0]
            .iter()
            .zip([1.40, 1.41, 1.40])
            .map(|(&e, d)| (e, d, 0.05))
            .collect();
        assert!(!loglog_fit(&flat).unwrap().printable());
        // Not a line (a kink far outside the error bars): not printed.
        let kink = [(0.01, 0.1, 0.001), (0.1, 1.0, 0.01), (1.0, 1.05, 0.0105)];
        assert!(!loglog_fit(&kink).unwrap().printable());
    }

    /// On the lattice of n = 64 overlaps the width is a whole number of steps 2/64 and every
    /// bin holds the same number of lattice values, so a uniform spread over the lattice gives a
    /// flat histogram (a fixed 40 bins of 0.05 alternate between 1 and 2 values per bin); the
    /// density integrates to 1.
    #[test]
    fn lattice_histograms_do_not_alternate() {
        let s = 2.0 / 64.0;
        let values: Vec<f64> = (0..=64).map(|k| -1.0 + k as f64 * s).collect();
        let w = overlap_bin_width(&values, Some(s));
        assert!((w / s - (w / s).round()).abs() < 1e-12, "{w}");
        let h = histogram_width(&values, w, Some(s));
        let mass: f64 = h.iter().map(|b| (b.1 - b.0) * b.2).sum();
        assert!((mass - 1.0).abs() < 1e-12, "{mass}");
        let inner: Vec<f64> = h[1..h.len() - 1].iter().map(|b| b.2).collect();
        assert!(inner.iter().all(|&d| (d - inner[0]).abs() < 1e-12), "{h:?}");
        let old = histogram(&values, 40);
        assert!(old.iter().any(|b| (b.2 - old[1].2).abs() > 1e-9));
    }

    #[test]
    fn histogram_is_a_density() {
        let h = histogram(&[-1.0, -0.5, 0.0, 0.0, 0.99, 1.0], 4);
        assert_eq!(h.len(), 4);
        let mass: f64 = h.iter().map(|b| (b.1 - b.0) * b.2).sum();
        assert!((mass - 1.0).abs() < 1e-12);
        // bins [-1,-0.5), [-0.5,0), [0,0.5), [0.5,1]: counts 1, 1, 2, 2.
        let counts: Vec<f64> = h.iter().map(|b| b.2 * 0.5 * 6.0).collect();
        assert_eq!(counts, vec![1.0, 1.0, 2.0, 2.0]);
    }

    /// The legend goes to the corner it covers least: with points filling the upper half, a
    /// lower corner; with every corner empty, the upper right (common practice: the legend off
    /// the data).
    #[test]
    fn legend_avoids_the_data() {
        let range = (0..1000, 0..800);
        let labels = vec!["n = 100".to_string(), "n = 1000".to_string()];
        let upper: Vec<(i32, i32)> = (0..100).map(|k| (k * 10, 50 + (k % 7) * 30)).collect();
        let c = legend_corner(&range, &upper, &labels);
        assert!(matches!(
            c,
            SeriesLabelPosition::LowerRight | SeriesLabelPosition::LowerLeft
        ));
        let right: Vec<(i32, i32)> = (0..80).map(|k| (900 + k % 90, k * 10)).collect();
        assert!(matches!(
            legend_corner(&range, &right, &labels),
            SeriesLabelPosition::UpperLeft
        ));
        assert!(matches!(
            legend_corner(&range, &[], &labels),
            SeriesLabelPosition::UpperRight
        ));
    }

    /// Grey test, through the drawing code: every figure kind with six series draws its legend
    /// entries (or panel titles) with six styles that differ pairwise in marker shape (outline
    /// or fill), so a grey print tells them apart even where grey levels coincide (common
    /// practice for print).
    #[test]
    fn every_figure_kind_reads_in_grey() {
        use crate::plot::{Size, to_png};
        let take = || LEGEND_STYLES.with(|c| std::mem::take(&mut *c.borrow_mut()));
        let labels: Vec<String> = (0..6).map(|i| format!("series {i}")).collect();
        let check = |kind: &str, styles: Vec<SeriesStyle>| {
            assert!(styles.len() >= 6, "{kind}: {} legend entries", styles.len());
            let distinct: Vec<SeriesStyle> = styles.iter().fold(Vec::new(), |mut v, s| {
                if !v.contains(s) {
                    v.push(*s);
                }
                v
            });
            assert_eq!(distinct.len(), 6, "{kind}: {distinct:?}");
            for (i, a) in distinct.iter().enumerate() {
                for b in &distinct[..i] {
                    assert_ne!(a.shape, b.shape, "{kind}: two entries share a marker");
                }
            }
        };
        take();
        let energy = EnergyFigure {
            omega: 2.0 / 3.0,
            series: labels
                .iter()
                .map(|l| EnergySeries {
                    label: l.clone(),
                    points: vec![(64.0, 0.7, 0.01), (128.0, 0.72, 0.01)],
                    fit: None,
                })
                .collect(),
            theory: vec![],
            caption: String::new(),
        };
        // Six series: panels, each named by its title line.
        to_png(Size::TwoColumn, &energy).unwrap();
        check("energy (panels)", take());
        let mut four = energy.clone();
        four.series.truncate(4);
        to_png(Size::OneColumn, &four).unwrap();
        assert_eq!(take().len(), 4, "energy");
        let stability = StabilityFigure {
            title: String::new(),
            series: labels
                .iter()
                .map(|l| StabilitySeries {
                    label: l.clone(),
                    points: vec![(0.01, 0.5, 0.01), (0.1, 1.0, 0.01)],
                    before_rounding: vec![],
                    slope: None,
                })
                .collect(),
            caption: String::new(),
            modulo_flip: false,
        };
        to_png(Size::OneColumn, &stability).unwrap();
        check("stability", take());
        let overlaps = OverlapFigure {
            title: String::new(),
            series: labels
                .iter()
                .map(|l| OverlapSeries {
                    label: l.clone(),
                    bins: vec![(-1.0, 0.0, 0.4), (0.0, 1.0, 0.6)],
                })
                .collect(),
            caption: String::new(),
            markers: None,
            distribution: None,
        };
        to_png(Size::OneColumn, &overlaps).unwrap();
        check("overlaps", take());
        let traces = TraceFigure {
            title: String::new(),
            unit: "sweep".into(),
            series: labels
                .iter()
                .map(|l| TraceSeries {
                    label: l.clone(),
                    points: vec![(1.0, 0.5), (10.0, 0.7)],
                })
                .collect(),
            caption: String::new(),
            target: None,
        };
        to_png(Size::OneColumn, &traces).unwrap();
        check("traces", take());
        let scan = ScanFigure {
            panels: vec![ScanPanel {
                x_label: "β".into(),
                y_label: "energy".into(),
                series: labels
                    .iter()
                    .map(|l| (l.clone(), vec![(0.5, 0.3, 0.01), (1.0, 0.5, 0.01)]))
                    .collect(),
                theory: None,
            }],
            caption: String::new(),
        };
        to_png(Size::OneColumn, &scan).unwrap();
        check("scan", take());
    }

    /// Render test: figures whose data reach every corner (energies spread over the whole
    /// range at both ends of the axis, with a theory line; distances at both ends of ε) are
    /// drawn with legends that cover no drawn point or line (by the legend box as estimated from
    /// its font). Common practice: a legend never hides data.
    #[test]
    fn rendered_legends_cover_no_data() {
        use crate::plot::{Size, to_svg};
        let take = || LEGEND_COVERS.with(|c| std::mem::take(&mut *c.borrow_mut()));
        take();
        for k in 1..=4usize {
            let series: Vec<EnergySeries> = (0..k)
                .map(|i| EnergySeries {
                    label: format!("algorithm {i}"),
                    // Sizes from 64 to 2^20 (x from near 0 to the right end), energies at
                    // three levels spanning the range: every corner holds data.
                    points: (0..15)
                        .map(|j| {
                            let level = [0.75, 0.55, 0.65][(i + j) % 3];
                            (64.0 * 2f64.powf(j as f64 * 14.0 / 14.0), level, 0.01)
                        })
                        .collect(),
                    // A flat fit at the series' first level: a legend entry per series.
                    fit: Some(Fit {
                        e_inf: [0.75, 0.55, 0.65][i % 3],
                        e_inf_se: 0.005,
                        a: 0.0,
                        a_se: 0.0,
                        b: None,
                        omega: 2.0 / 3.0,
                        omega_se: 0.0,
                        chi2: 1.0,
                        dof: 3,
                        warnings: vec![],
                        cov: vec![vec![2.5e-5, 0.0], vec![0.0, 0.0]],
                    }),
                })
                .collect();
            let fig = EnergyFigure {
                omega: 2.0 / 3.0,
                series,
                theory: vec![(0.7632, "Parisi value".into())],
                caption: String::new(),
            };
            for size in [Size::OneColumn, Size::TwoColumn] {
                to_svg(size, &fig).unwrap();
                let covers = take();
                assert!(
                    !covers.is_empty() && covers.iter().all(|&c| c == 0),
                    "{k} series: {covers:?}"
                );
            }
        }
        // A series without a fit (too few sizes) is still named in the legend.
        let unfitted = EnergyFigure {
            omega: 2.0 / 3.0,
            series: vec![EnergySeries {
                label: "lonely series".into(),
                points: vec![(64.0, 0.7, 0.01)],
                fit: None,
            }],
            theory: vec![],
            caption: String::new(),
        };
        assert!(
            to_svg(Size::OneColumn, &unfitted)
                .unwrap()
                .contains("lonely series")
        );
        take();
        let fig = StabilityFigure {
            title: String::new(),
            series: (0..3)
                .map(|i| StabilitySeries {
                    label: format!("n = {}", 100 << i),
                    points: vec![(0.001, 0.05 + 0.3 * i as f64, 0.01), (0.1, 1.3, 0.02)],
                    before_rounding: vec![(0.001, 0.04, 0.01), (0.1, 1.2, 0.02)],
                    slope: None,
                })
                .collect(),
            caption: String::new(),
            modulo_flip: true,
        };
        to_svg(Size::OneColumn, &fig).unwrap();
        let covers = take();
        assert!(covers == vec![0], "{covers:?}");
    }

    /// Tick labels share their decimals, use U+2212 and never read −0 (common practice in
    /// typesetting).
    #[test]
    fn tick_labels() {
        let f = ticks(-0.1..0.1, 5);
        let labels: Vec<String> = [-0.1, -0.05, 0.0, 0.05, 0.1].iter().map(&f).collect();
        assert_eq!(
            labels,
            ["\u{2212}0.10", "\u{2212}0.05", "0.00", "0.05", "0.10"]
        );
        assert_eq!(ticks(0.0..1.0, 5)(&0.5), "0.5");
        assert_eq!(ticks(0.6..0.8, 5)(&0.75), "0.75");
        assert_eq!(ticks(0.6..0.8, 5)(&0.7), "0.70");
        assert_eq!(ticks(-1e-3..1e-3, 4)(&-1e-9), "0.000");
        // A range where plotters puts 6 labels 0.05 apart (0.55 … 0.80): two decimals.
        assert_eq!(tick_step(0.53, 0.84, 6), 0.05);
        assert_eq!(ticks(0.53..0.84, 6)(&0.8), "0.80");
    }

    #[test]
    fn wrapping() {
        assert_eq!(wrap("a bb ccc dddd", 6), vec!["a bb", "ccc", "dddd"]);
    }
}

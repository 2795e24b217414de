//! Plots of a planned route or motion, and of a bench run, as PNG and SVG.
//!
//! Drawn with `plotters` through its pure-Rust backends only (bitmap and SVG), so no system
//! graphics or font library is needed. Text in bitmaps is rasterised by `ab_glyph` from a
//! font embedded in the binary (DejaVu Sans, Bitstream Vera licence, see
//! `assets/fonts/LICENSE-DejaVu.txt`): a bundled font draws the same on every machine and
//! needs no font lookup. SVG text names the `sans-serif` family and is drawn by the viewer.
//! Images are rendered into memory and returned as bytes; [`write_plots`] writes them with
//! [`crate::output::write_atomic`].
//!
//! The plots of a planned result ([`PlotData`], from [`crate::plot_data`]):
//! - `joints`: one panel per position coordinate (left) and per velocity coordinate (right)
//!   over time, with the limits as dashed lines and the grasp switches as grey lines;
//! - `residual`: the constraint residual along the path against the tolerance, log scale;
//! - `clearance`: the smallest distance between bodies along the path, with zero (contact).
//!
//! Colours are our own: data in dark teal, limits and tolerances in brick red, switches in
//! grey.

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use plotters::coord::Shift;
use plotters::prelude::*;
use thiserror::Error;

use crate::output::{write_atomic, OutputError};
use crate::plot_data::{PlotData, Series};

/// DejaVu Sans 2.37 (Bitstream Vera licence), see the module docs.
static FONT: &[u8] = include_bytes!("../assets/fonts/DejaVuSans.ttf");

const DATA: RGBColor = RGBColor(0x1b, 0x6f, 0x6a);
const LIMIT: RGBColor = RGBColor(0xa8, 0x3a, 0x2a);
const SWITCH: RGBColor = RGBColor(0x9a, 0x9a, 0x9a);
const INK: RGBColor = RGBColor(0x22, 0x22, 0x22);

/// Size of the residual and clearance plots (pixels).
pub const LINE_PLOT_SIZE: (u32, u32) = (1000, 420);
/// Width of the joints plot; its height is [`JOINT_PANEL_HEIGHT`] per row plus a header.
pub const JOINTS_WIDTH: u32 = 1100;
pub const JOINT_PANEL_HEIGHT: u32 = 120;
const JOINTS_HEADER: u32 = 40;

/// An image format.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum Format {
    Png,
    Svg,
}

impl Format {
    pub fn extension(self) -> &'static str {
        match self {
            Format::Png => "png",
            Format::Svg => "svg",
        }
    }
}

/// A plot could not be made or written.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum PlotError {
    #[error("drawing the {what} plot: {message}")]
    Draw { what: &'static str, message: String },
    #[error("encoding the {what} plot as PNG: {message}")]
    Encode { what: &'static str, message: String },
    #[error("the embedded font could not be loaded")]
    Font,
    #[error(transparent)]
    Output(#[from] OutputError),
}

fn font_ready() -> Result<(), PlotError> {
    static READY: OnceLock<bool> = OnceLock::new();
    let ok = *READY.get_or_init(|| {
        plotters::style::register_font("sans-serif", FontStyle::Normal, FONT).is_ok()
    });
    ok.then_some(()).ok_or(PlotError::Font)
}

/// Something drawn the same way on every backend.
trait Chart {
    const NAME: &'static str;
    fn size(&self) -> (u32, u32);
    fn draw<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> Result<(), String>;
}

fn render<C: Chart>(chart: &C, format: Format) -> Result<Vec<u8>, PlotError> {
    let (w, h) = chart.size();
    let draw_err = |message: String| PlotError::Draw {
        what: C::NAME,
        message,
    };
    match format {
        Format::Svg => {
            let mut text = String::new();
            {
                let area = SVGBackend::with_string(&mut text, (w, h)).into_drawing_area();
                chart.draw(&area).map_err(draw_err)?;
                area.present().map_err(|e| draw_err(e.to_string()))?;
            }
            Ok(text.into_bytes())
        }
        Format::Png => {
            font_ready()?;
            let mut rgb = vec![0u8; w as usize * h as usize * 3];
            {
                let area = BitMapBackend::with_buffer(&mut rgb, (w, h)).into_drawing_area();
                chart.draw(&area).map_err(draw_err)?;
                area.present().map_err(|e| draw_err(e.to_string()))?;
            }
            encode_png(&rgb, w, h).map_err(|message| PlotError::Encode {
                what: C::NAME,
                message,
            })
        }
    }
}

fn encode_png(rgb: &[u8], w: u32, h: u32) -> Result<Vec<u8>, String> {
    let mut out = Vec::new();
    let mut enc = png::Encoder::new(&mut out, w, h);
    enc.set_color(png::ColorType::Rgb);
    enc.set_depth(png::BitDepth::Eight);
    let mut writer = enc.write_header().map_err(|e| e.to_string())?;
    writer.write_image_data(rgb).map_err(|e| e.to_string())?;
    writer.finish().map_err(|e| e.to_string())?;
    Ok(out)
}

fn s<E: std::fmt::Display>(e: E) -> String {
    e.to_string()
}

/// `(lo, hi)` widened so that a flat series still gets a visible range.
fn padded(lo: f64, hi: f64) -> (f64, f64) {
    if !(lo.is_finite() && hi.is_finite()) {
        return (-1.0, 1.0);
    }
    let span = hi - lo;
    let pad = if span > 1e-12 {
        0.06 * span
    } else {
        0.5 * lo.abs().max(1e-3)
    };
    (lo - pad, hi + pad)
}

fn time_range(t: &[f64]) -> (f64, f64) {
    let lo = t.first().copied().unwrap_or(0.0);
    let hi = t.last().copied().unwrap_or(1.0);
    if hi > lo {
        (lo, hi)
    } else {
        (lo, lo + 1.0)
    }
}

/// The joints plot.
pub struct JointsChart<'a>(pub &'a PlotData);

impl JointsChart<'_> {
    fn rows(&self) -> usize {
        let j = &self.0.joints;
        j.positions.len().max(j.velocities.len()).max(1)
    }
}

impl Chart for JointsChart<'_> {
    const NAME: &'static str = "joints";
    fn size(&self) -> (u32, u32) {
        (
            JOINTS_WIDTH,
            JOINTS_HEADER + JOINT_PANEL_HEIGHT * self.rows() as u32,
        )
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), String> {
        let d = self.0;
        root.fill(&WHITE).map_err(s)?;
        let title = format!(
            "{}: joint positions (left) and velocities (right) over time (s); dashed: limits",
            d.title
        );
        let (head, body) = root.split_vertically(JOINTS_HEADER);
        head.draw(&Text::new(
            title,
            (12, 10),
            ("sans-serif", 18).into_font().color(&INK),
        ))
        .map_err(s)?;
        let panels = body.split_evenly((self.rows(), 2));
        let (t0, t1) = time_range(&d.joints.t);
        for (col, tracks, unit) in [
            (0, &d.joints.positions, "position"),
            (1, &d.joints.velocities, "velocity"),
        ] {
            for (row, track) in tracks.iter().enumerate() {
                let area = &panels[row * 2 + col];
                let finite = track.values.iter().copied().filter(|v| v.is_finite());
                let (mut lo, mut hi) = finite.fold((f64::INFINITY, f64::NEG_INFINITY), |a, v| {
                    (a.0.min(v), a.1.max(v))
                });
                for l in [track.lower, track.upper].into_iter().flatten() {
                    lo = lo.min(l);
                    hi = hi.max(l);
                }
                let (lo, hi) = padded(lo, hi);
                let mut chart = ChartBuilder::on(area)
                    .margin(4)
                    .caption(
                        format!("{} ({unit})", track.name),
                        ("sans-serif", 13).into_font().color(&INK),
                    )
                    .x_label_area_size(18)
                    .y_label_area_size(52)
                    .build_cartesian_2d(t0..t1, lo..hi)
                    .map_err(s)?;
                chart
                    .configure_mesh()
                    .x_labels(6)
                    .y_labels(4)
                    .light_line_style(WHITE)
                    .label_style(("sans-serif", 11))
                    .draw()
                    .map_err(s)?;
                for &ts in &d.switch_times {
                    chart
                        .draw_series(LineSeries::new([(ts, lo), (ts, hi)], SWITCH))
                        .map_err(s)?;
                }
                for l in [track.lower, track.upper].into_iter().flatten() {
                    chart
                        .draw_series(DashedLineSeries::new(
                            [(t0, l), (t1, l)],
                            6,
                            4,
                            LIMIT.stroke_width(1),
                        ))
                        .map_err(s)?;
                }
                chart
                    .draw_series(LineSeries::new(
                        d.joints
                            .t
                            .iter()
                            .copied()
                            .zip(track.values.iter().copied())
                            .filter(|(_, v)| v.is_finite()),
                        DATA.stroke_width(2),
                    ))
                    .map_err(s)?;
            }
        }
        Ok(())
    }
}

/// The residual plot (log scale).
pub struct ResidualChart<'a>(pub &'a PlotData);

/// Smallest residual drawn on the log scale: the smallest positive residual (at least
/// 1e-17), or the tolerance times 1e-8 when none is positive. Exact zeros (at waypoints
/// projected exactly) are drawn at it.
pub fn residual_floor(data: &PlotData) -> f64 {
    let smallest = data
        .residual
        .y
        .iter()
        .copied()
        .filter(|v| *v > 0.0)
        .fold(f64::INFINITY, f64::min);
    if smallest.is_finite() {
        smallest.max(1e-17)
    } else {
        (data.tolerance * 1e-8).max(1e-17)
    }
}

impl Chart for ResidualChart<'_> {
    const NAME: &'static str = "residual";
    fn size(&self) -> (u32, u32) {
        LINE_PLOT_SIZE
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), String> {
        let d = self.0;
        root.fill(&WHITE).map_err(s)?;
        let floor = residual_floor(d);
        let max = d.residual.max();
        let lo = floor / 2.0;
        let hi = (d.tolerance * 10.0).max(if max.is_finite() { max * 2.0 } else { 0.0 });
        let (t0, t1) = time_range(&d.residual.t);
        let mut chart = ChartBuilder::on(root)
            .margin(12)
            .caption(
                format!(
                    "{}: constraint residual along the path (max {:.2e}, tolerance {:.1e})",
                    d.title, max, d.tolerance
                ),
                ("sans-serif", 17).into_font().color(&INK),
            )
            .x_label_area_size(40)
            .y_label_area_size(70)
            .build_cartesian_2d(t0..t1, (lo..hi).log_scale())
            .map_err(s)?;
        chart
            .configure_mesh()
            .x_desc("time (s)")
            .y_desc("residual norm")
            .y_label_formatter(&|v| format!("{v:.0e}"))
            .label_style(("sans-serif", 13))
            .draw()
            .map_err(s)?;
        draw_switches(&mut chart, &d.switch_times, lo, hi)?;
        chart
            .draw_series(DashedLineSeries::new(
                [(t0, d.tolerance), (t1, d.tolerance)],
                8,
                5,
                LIMIT.stroke_width(2),
            ))
            .map_err(s)?
            .label("tolerance")
            .legend(|(x, y)| PathElement::new([(x, y), (x + 18, y)], LIMIT.stroke_width(2)));
        chart
            .draw_series(LineSeries::new(
                points(&d.residual).map(|(t, v)| (t, v.max(floor))),
                DATA.stroke_width(1),
            ))
            .map_err(s)?
            .label("residual")
            .legend(|(x, y)| PathElement::new([(x, y), (x + 18, y)], DATA.stroke_width(2)));
        chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.85))
            .border_style(INK)
            .label_font(("sans-serif", 13))
            .draw()
            .map_err(s)?;
        Ok(())
    }
}

fn points(series: &Series) -> impl Iterator<Item = (f64, f64)> + Clone + '_ {
    series
        .t
        .iter()
        .copied()
        .zip(series.y.iter().copied())
        .filter(|(t, v)| t.is_finite() && v.is_finite())
}

fn draw_switches<DB: DrawingBackend, Y>(
    chart: &mut ChartContext<'_, DB, Cartesian2d<plotters::coord::types::RangedCoordf64, Y>>,
    times: &[f64],
    lo: f64,
    hi: f64,
) -> Result<(), String>
where
    Y: Ranged<ValueType = f64>,
{
    for &ts in times {
        chart
            .draw_series(LineSeries::new([(ts, lo), (ts, hi)], SWITCH))
            .map_err(s)?;
    }
    Ok(())
}

/// The clearance plot.
pub struct ClearanceChart<'a>(pub &'a PlotData);

impl Chart for ClearanceChart<'_> {
    const NAME: &'static str = "clearance";
    fn size(&self) -> (u32, u32) {
        LINE_PLOT_SIZE
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), String> {
        let d = self.0;
        root.fill(&WHITE).map_err(s)?;
        let empty = Series::default();
        let series = d.clearance.as_ref().unwrap_or(&empty);
        let (min, max) = (series.min(), series.max());
        let (lo, hi) = if min.is_finite() && max.is_finite() {
            padded(min.min(0.0), max)
        } else {
            (-0.1, 1.0)
        };
        let (t0, t1) = time_range(&series.t);
        let caption = if d.clearance.is_some() {
            format!(
                "{}: clearance along the path (min {:.4} m; below 0: contact)",
                d.title, min
            )
        } else {
            format!("{}: nothing in the scene can collide", d.title)
        };
        let mut chart = ChartBuilder::on(root)
            .margin(12)
            .caption(caption, ("sans-serif", 17).into_font().color(&INK))
            .x_label_area_size(40)
            .y_label_area_size(70)
            .build_cartesian_2d(t0..t1, lo..hi)
            .map_err(s)?;
        chart
            .configure_mesh()
            .x_desc("time (s)")
            .y_desc("clearance (m)")
            .label_style(("sans-serif", 13))
            .draw()
            .map_err(s)?;
        draw_switches(&mut chart, &d.switch_times, lo, hi)?;
        chart
            .draw_series(DashedLineSeries::new(
                [(t0, 0.0), (t1, 0.0)],
                8,
                5,
                LIMIT.stroke_width(2),
            ))
            .map_err(s)?;
        chart
            .draw_series(LineSeries::new(points(series), DATA.stroke_width(2)))
            .map_err(s)?;
        Ok(())
    }
}

/// Run times of a bench, one group per scenario.
pub struct TimesChart<'a> {
    pub title: &'a str,
    /// Scenario name and the wall-clock seconds of each of its runs (with success flag).
    pub groups: &'a [(String, Vec<(f64, bool)>)],
}

impl Chart for TimesChart<'_> {
    const NAME: &'static str = "bench times";
    fn size(&self) -> (u32, u32) {
        (
            (260 * self.groups.len() as u32).clamp(700, 2400),
            LINE_PLOT_SIZE.1 + 40,
        )
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), String> {
        root.fill(&WHITE).map_err(s)?;
        let n = self.groups.len().max(1);
        let max = self
            .groups
            .iter()
            .flat_map(|(_, v)| v.iter().map(|x| x.0))
            .fold(0.0f64, f64::max);
        let hi = if max > 0.0 { max * 1.1 } else { 1.0 };
        let names: Vec<String> = self.groups.iter().map(|(n, _)| n.clone()).collect();
        let label = move |x: &f64| {
            let i = x.round();
            if (x - i).abs() < 1e-6 && i >= 0.0 {
                names.get(i as usize).cloned().unwrap_or_default()
            } else {
                String::new()
            }
        };
        let mut chart = ChartBuilder::on(root)
            .margin(12)
            .caption(
                format!(
                    "{}: wall-clock time per run (dots: runs, bar: median; red: failed)",
                    self.title
                ),
                ("sans-serif", 16).into_font().color(&INK),
            )
            .x_label_area_size(40)
            .y_label_area_size(60)
            .build_cartesian_2d(-0.5..(n as f64 - 0.5), 0.0..hi)
            .map_err(s)?;
        chart
            .configure_mesh()
            .x_labels(n * 4 + 1)
            .x_label_formatter(&label)
            .y_desc("seconds")
            .disable_x_mesh()
            .label_style(("sans-serif", 13))
            .draw()
            .map_err(s)?;
        for (i, (_, runs)) in self.groups.iter().enumerate() {
            let k = runs.len().max(1);
            // Runs spread evenly across the group's slot (no randomness: the same bench
            // draws the same picture).
            chart
                .draw_series(runs.iter().enumerate().map(|(j, &(t, ok))| {
                    let x = i as f64 - 0.3 + 0.6 * (j as f64 + 0.5) / k as f64;
                    Circle::new((x, t), 4, if ok { DATA.filled() } else { LIMIT.filled() })
                }))
                .map_err(s)?;
            let mut times: Vec<f64> = runs.iter().map(|r| r.0).collect();
            if let Some(m) = median(&mut times) {
                let (a, b) = (i as f64 - 0.35, i as f64 + 0.35);
                chart
                    .draw_series(LineSeries::new([(a, m), (b, m)], INK.stroke_width(3)))
                    .map_err(s)?;
            }
        }
        Ok(())
    }
}

/// Median of `v` (sorted in place); `None` when empty.
pub fn median(v: &mut [f64]) -> Option<f64> {
    quantile(v, 0.5)
}

/// The `p`-quantile of `v` (sorted in place) by linear interpolation between order
/// statistics (the "type 7" rule of Hyndman and Fan, 1996, common in statistics packages);
/// `None` when empty.
pub fn quantile(v: &mut [f64], p: f64) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let h = (v.len() - 1) as f64 * p.clamp(0.0, 1.0);
    let (i, frac) = (h.floor() as usize, h - h.floor());
    let next = v.get(i + 1).copied().unwrap_or(v[i]);
    Some(v[i] + frac * (next - v[i]))
}

/// A rendered plot: name (`joints`, `residual`, `clearance`), format and the file's bytes.
pub type RenderedPlot = (&'static str, Format, Vec<u8>);

/// The three plots of a planned result as bytes.
pub fn plot_bytes(data: &PlotData) -> Result<Vec<RenderedPlot>, PlotError> {
    let mut out = Vec::new();
    for format in [Format::Png, Format::Svg] {
        out.push(("joints", format, render(&JointsChart(data), format)?));
        out.push(("residual", format, render(&ResidualChart(data), format)?));
        out.push(("clearance", format, render(&ClearanceChart(data), format)?));
    }
    Ok(out)
}

/// The bench times plot as bytes.
pub fn times_bytes(chart: &TimesChart<'_>, format: Format) -> Result<Vec<u8>, PlotError> {
    render(chart, format)
}

/// Render every plot first, then write `dir/{joints,residual,clearance}.{png,svg}`
/// atomically (the directory must exist). Returns the paths written.
pub fn write_plots(data: &PlotData, dir: &Path) -> Result<Vec<PathBuf>, PlotError> {
    let all = plot_bytes(data)?;
    let mut written = Vec::new();
    for (name, format, bytes) in all {
        let p = dir.join(format!("{name}.{}", format.extension()));
        write_atomic(&p, &bytes)?;
        written.push(p);
    }
    Ok(written)
}

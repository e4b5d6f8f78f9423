//! Plots of one clip and of a batch, as SVG and PNG, drawn with plotters and the embedded
//! DejaVu Sans font (no system font library is needed to build or run).
//!
//! Per clip: `angles` (drive and nut angle against time, blow onsets marked),
//! `twist_torque` (twist against time with torque = stiffness × twist on the right axis and
//! the bar's rating as a line) and `nut_advance` (nut advance per blow as bars). Per batch:
//! `comparison` (`plot/comparison.rs`: peak torque and torque on the last advancing blow against the rating, per
//! clip; nut advance per blow overlaid across clips). PNGs are rendered into an RGB buffer
//! and saved with `image`, so plotters needs no image encoder of its own.
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use plotters::chart::{DualCoordChartContext, MeshStyle};
use plotters::coord::Shift;
use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;
use plotters::style::FontStyle;

use super::display::{ReportOptions, TorqueUnit, tick, tick_sig};
use crate::analyze::Analysis;
use crate::error::{Error, Result};

mod aligned;
mod clip;
mod comparison;
#[cfg(test)]
pub(crate) mod tests;

use clip::{AdvancePlot, AnglesPlot, TwistPlot};
use comparison::ComparisonPlot;
pub use comparison::{ComparisonClip, write_comparison, write_comparison_with};

/// DejaVu Sans (Debian's fonts-dejavu-core; licence in `assets/DejaVuSans-LICENSE.txt`).
pub(crate) const FONT_TTF: &[u8] = include_bytes!("../../../assets/DejaVuSans.ttf");

/// The family name the embedded font is registered under.
const FONT: &str = "sans-serif";

/// Size of a per-clip plot, pixels.
const CLIP_SIZE: (u32, u32) = (1200, 650);
/// Size of the batch comparison plot, pixels.
const COMPARISON_SIZE: (u32, u32) = (1200, 1450);

const DRIVE_COLOR: RGBColor = RGBColor(31, 119, 180);
const NUT_COLOR: RGBColor = RGBColor(230, 110, 0);
const TWIST_COLOR: RGBColor = RGBColor(90, 60, 160);
const RATING_COLOR: RGBColor = RGBColor(200, 30, 30);
const ONSET_COLOR: RGBColor = RGBColor(170, 170, 170);
const GRID_COLOR: RGBColor = RGBColor(232, 232, 232);
/// Blow numbers on the onset lines.
const ONSET_TEXT_COLOR: RGBColor = RGBColor(90, 90, 90);
/// Bars of blows in which the nut did not advance.
const STALLED_COLOR: RGBColor = RGBColor(185, 185, 185);
/// Distinct, readable line colours for clips in the comparison plot (cycled).
const SERIES_COLORS: [RGBColor; 10] = [
    RGBColor(31, 119, 180),
    RGBColor(230, 110, 0),
    RGBColor(44, 160, 44),
    RGBColor(214, 39, 40),
    RGBColor(148, 103, 189),
    RGBColor(140, 86, 75),
    RGBColor(227, 119, 194),
    RGBColor(100, 100, 100),
    RGBColor(160, 160, 20),
    RGBColor(23, 170, 190),
];

/// The caution printed on every plot that shows a torque.
const TORQUE_NOTE: &str = "torque = bar stiffness × twist: a model, not a calibrated measurement; verify with a torque wrench";

type PlotResult = std::result::Result<(), Box<dyn std::error::Error>>;

/// Registers the embedded font with plotters once per process.
fn register_font() -> Result<()> {
    static REGISTERED: OnceLock<bool> = OnceLock::new();
    let ok = *REGISTERED
        .get_or_init(|| plotters::style::register_font(FONT, FontStyle::Normal, FONT_TTF).is_ok());
    if ok {
        Ok(())
    } else {
        Err(Error::Output {
            path: PathBuf::from("assets/DejaVuSans.ttf"),
            reason: "the embedded plot font could not be loaded; rebuild from a clean checkout"
                .into(),
        })
    }
}

/// A plot that can be drawn on any plotters backend.
trait Plot {
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> PlotResult
    where
        DB::ErrorType: 'static;
}

/// Renders `plot` as `dir/<stem>.svg` and `dir/<stem>.png`.
fn render(plot: &impl Plot, dir: &Path, stem: &str, size: (u32, u32)) -> Result<Vec<PathBuf>> {
    register_font()?;
    std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
    let svg_path = dir.join(format!("{stem}.svg"));
    let png_path = dir.join(format!("{stem}.png"));
    let failed = |path: &Path, e: Box<dyn std::error::Error>| Error::Output {
        path: path.to_path_buf(),
        reason: format!("could not draw the plot: {e}"),
    };

    let svg = svg_string(plot, size, &svg_path)?;
    super::write_atomic(&svg_path, svg.as_bytes())?;

    let mut buf = vec![255u8; size.0 as usize * size.1 as usize * 3];
    {
        let root = BitMapBackend::with_buffer(&mut buf, size).into_drawing_area();
        plot.draw(&root).map_err(|e| failed(&png_path, e))?;
        root.present().map_err(|e| failed(&png_path, Box::new(e)))?;
    }
    let img = image::RgbImage::from_raw(size.0, size.1, buf).ok_or_else(|| Error::Output {
        path: png_path.clone(),
        reason: "plot buffer has the wrong size".into(),
    })?;
    super::save_png_atomic(&img, &png_path)?;
    Ok(vec![svg_path, png_path])
}

/// Draws `plot` into an SVG document in memory; `path` names it in errors.
fn svg_string(plot: &impl Plot, size: (u32, u32), path: &Path) -> Result<String> {
    register_font()?;
    let failed = |e: Box<dyn std::error::Error>| Error::Output {
        path: path.to_path_buf(),
        reason: format!("could not draw the plot: {e}"),
    };
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, size).into_drawing_area();
        plot.draw(&root).map_err(failed)?;
        root.present().map_err(|e| failed(Box::new(e)))?;
    }
    Ok(svg)
}

/// The per-clip plots as SVG documents in memory, with their titles, for `report.html`.
///
/// # Errors
/// [`Error::Output`] when a plot cannot be drawn.
pub(crate) fn clip_svgs(
    analysis: &Analysis,
    opts: &ReportOptions,
) -> Result<Vec<(&'static str, String)>> {
    let d = ClipPlotData::from_analysis(analysis, opts.units);
    let at = |stem: &str| PathBuf::from(format!("report.html ({stem} plot)"));
    Ok(vec![
        (
            "Drive and nut angle",
            svg_string(&AnglesPlot(&d), CLIP_SIZE, &at("angles"))?,
        ),
        (
            "Twist and torque",
            svg_string(&TwistPlot(&d), CLIP_SIZE, &at("twist_torque"))?,
        ),
        (
            "Nut advance per blow",
            svg_string(&AdvancePlot(&d), CLIP_SIZE, &at("nut_advance"))?,
        ),
        (
            "Every blow lined up at its onset",
            svg_string(&aligned::AlignedPlot(&d), CLIP_SIZE, &at("blows_aligned"))?,
        ),
    ])
}

/// The batch comparison plot as an SVG document in memory, for `summary.html`.
///
/// # Errors
/// [`Error::Output`] when the plot cannot be drawn.
pub(crate) fn comparison_svg(clips: &[ComparisonClip], opts: &ReportOptions) -> Result<String> {
    svg_string(
        &ComparisonPlot(clips, opts.units),
        COMPARISON_SIZE,
        Path::new("summary.html (comparison plot)"),
    )
}

/// Time axis: seconds for long clips, milliseconds for short ones.
#[derive(Debug, Clone, Copy)]
struct TimeAxis {
    scale: f64,
    unit: &'static str,
}

impl TimeAxis {
    fn for_span(span_s: f64) -> Self {
        if span_s < 2.0 {
            TimeAxis {
                scale: 1e3,
                unit: "ms",
            }
        } else {
            TimeAxis {
                scale: 1.0,
                unit: "s",
            }
        }
    }
    fn label(self) -> String {
        format!("time ({}, capture clock)", self.unit)
    }
}

/// What the per-clip plots show, taken from an [`Analysis`].
#[derive(Debug, Clone)]
struct ClipPlotData {
    name: String,
    axis: TimeAxis,
    /// Sample times on the plot's time axis.
    t: Vec<f64>,
    drive_deg: Vec<Option<f64>>,
    nut_deg: Vec<Option<f64>>,
    twist_deg: Vec<Option<f64>>,
    /// Blow onset times on the plot's time axis.
    onsets: Vec<f64>,
    /// Each blow's peak twist: (time on axis, twist deg).
    peaks: Vec<(f64, f64)>,
    /// Nut advance per blow, deg, by blow number (1-based).
    nut_advance_deg: Vec<(usize, Option<f64>)>,
    stiffness_nm_per_deg: Option<f64>,
    rating_nm: Option<f64>,
    /// The unit torques are shown in.
    unit: TorqueUnit,
    /// Whether the nut advanced in each blow (by blow number - 1).
    nut_advanced: Vec<bool>,
    /// Each blow's twist against time since its onset.
    aligned: Vec<AlignedBlow>,
    /// Sample interval, ms (to place blows on a common clock).
    dt_ms: f64,
}

impl ClipPlotData {
    fn from_analysis(a: &Analysis, unit: TorqueUnit) -> Self {
        let tr = &a.trace;
        let n = tr.len();
        let t_s: Vec<f64> = (0..n).map(|i| tr.t_s(i)).collect();
        let span = match (t_s.first(), t_s.last()) {
            (Some(f), Some(l)) => l - f,
            _ => 0.0,
        };
        let axis = TimeAxis::for_span(span);
        let deg = |v: &Vec<Option<crate::Angle>>| -> Vec<Option<f64>> {
            v.iter()
                .map(|x| x.map(|a| a.deg()).filter(|d| d.is_finite()))
                .collect()
        };
        let twist_deg: Vec<Option<f64>> = (0..n)
            .map(|i| tr.twist(i).map(|a| a.deg()).filter(|d| d.is_finite()))
            .collect();
        let onsets: Vec<f64> = a.blows.iter().map(|b| b.t_s * axis.scale).collect();
        // Peak-twist moment of each blow, from the segmentation's sample ranges.
        let peaks = a
            .segmentation
            .blows
            .iter()
            .filter_map(|b| {
                (b.onset..b.end.min(n))
                    .filter_map(|i| twist_deg[i].map(|tw| (i, tw)))
                    .max_by(|x, y| x.1.total_cmp(&y.1))
                    .map(|(i, tw)| (t_s[i] * axis.scale, tw))
            })
            .collect();
        let stiffness = a
            .summary
            .stiffness
            .or_else(|| a.rig.bar.as_ref().map(|b| b.stiffness()))
            .map(|k| k.nm_per_deg())
            .filter(|k| k.is_finite() && *k > 0.0);
        ClipPlotData {
            name: clip_name(a),
            axis,
            t: t_s.iter().map(|t| t * axis.scale).collect(),
            drive_deg: deg(&tr.drive),
            nut_deg: deg(&tr.nut),
            twist_deg: twist_deg.clone(),
            onsets,
            peaks,
            nut_advance_deg: a
                .blows
                .iter()
                .map(|b| (b.index, b.nut_advance.map(|x| x.deg())))
                .collect(),
            stiffness_nm_per_deg: stiffness,
            rating_nm: a.rig.bar.as_ref().and_then(|b| b.rating_nm),
            unit,
            nut_advanced: a.blows.iter().map(|b| b.nut_advanced).collect(),
            aligned: a
                .segmentation
                .blows
                .iter()
                .enumerate()
                .map(|(k, b)| {
                    let t0 = t_s.get(b.onset).copied().unwrap_or(0.0);
                    let pts = (b.onset..b.end.min(n))
                        .filter_map(|i| twist_deg[i].map(|tw| ((t_s[i] - t0) * 1e3, tw)))
                        .collect();
                    AlignedBlow {
                        index: k + 1,
                        advanced: a.blows.get(k).is_some_and(|m| m.nut_advanced),
                        points: pts,
                    }
                })
                .collect(),
            dt_ms: 1e3 / a.time_base.fps_hz(),
        }
    }
}

/// One blow's twist against the time since its onset, for the `blows_aligned` plot.
#[derive(Debug, Clone)]
struct AlignedBlow {
    /// Blow number (1-based).
    index: usize,
    /// Whether the nut advanced in this blow.
    advanced: bool,
    /// (ms since onset, twist deg).
    points: Vec<(f64, f64)>,
}

fn clip_name(a: &Analysis) -> String {
    let p = &a.clip.path;
    p.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| p.display().to_string())
}

/// Splits a series with gaps (lost marks) into runs of known points.
fn runs(t: &[f64], v: &[Option<f64>]) -> Vec<Vec<(f64, f64)>> {
    let mut out: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut cur: Vec<(f64, f64)> = Vec::new();
    for (x, y) in t.iter().zip(v) {
        match y {
            Some(y) => cur.push((*x, *y)),
            None if !cur.is_empty() => out.push(std::mem::take(&mut cur)),
            None => {}
        }
    }
    if !cur.is_empty() {
        out.push(cur);
    }
    out
}

/// A range covering `values` with 5 % headroom, never empty or inverted.
fn span<I: IntoIterator<Item = f64>>(values: I, include_zero: bool) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.into_iter().filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if include_zero {
        lo = lo.min(0.0);
        hi = hi.max(0.0);
    }
    if !(lo.is_finite() && hi.is_finite()) {
        return (0.0, 1.0);
    }
    if hi - lo < 1e-9 {
        let pad = if hi.abs() > 1e-9 { hi.abs() * 0.1 } else { 1.0 };
        return (lo - pad, hi + pad);
    }
    let pad = 0.05 * (hi - lo);
    (lo - pad, hi + pad)
}

fn time_range(d: &ClipPlotData) -> (f64, f64) {
    match (d.t.first(), d.t.last()) {
        (Some(&a), Some(&b)) if b > a => (a, b),
        (Some(&a), _) => (a, a + 1.0),
        _ => (0.0, 1.0),
    }
}

/// Draws a centred note in the plotting area (for empty data).
fn note_center<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, text: &str) -> PlotResult
where
    DB::ErrorType: 'static,
{
    let (w, h) = area.dim_in_pixel();
    let style = TextStyle::from((FONT, 22).into_font())
        .color(&RGBColor(120, 120, 120))
        .pos(plotters::style::text_anchor::Pos::new(
            plotters::style::text_anchor::HPos::Center,
            plotters::style::text_anchor::VPos::Center,
        ));
    area.draw_text(text, &style, (w as i32 / 2, h as i32 / 2))?;
    Ok(())
}

/// A twist chart's axes in the house style: time along the bottom (`x_desc`), twist on the
/// left and, with a stiffness `k` (N·m/deg), torque = k × twist on the right, labelled in
/// `unit` on the twist axis's own grid lines.
fn twist_torque_axes<DB: DrawingBackend>(
    chart: &mut DualCoordChartContext<'_, DB, TwistCoord, TwistCoord>,
    x_desc: &str,
    k: Option<f64>,
    unit: TorqueUnit,
) -> PlotResult
where
    DB::ErrorType: 'static,
{
    chart
        .configure_mesh()
        .x_desc(x_desc)
        .y_desc("twist = drive − nut (°)")
        .x_label_formatter(&|v| tick(*v))
        .y_label_formatter(&|v| tick(*v))
        .house_style()
        .draw()?;
    if let Some(k) = k {
        let k_unit = unit.of_nm(k);
        chart
            .configure_secondary_axes()
            .y_desc(format!("torque ({}, model)", unit.label()))
            .y_label_formatter(&|v| tick_sig(*v * k_unit, 3))
            .label_style((FONT, 18))
            .axis_desc_style((FONT, 22))
            .draw()?;
    }
    Ok(())
}

/// The coordinates of a twist chart: f64 time against f64 twist (or torque on the right).
type TwistCoord = Cartesian2d<RangedCoordf64, RangedCoordf64>;

/// The house style of a chart's mesh: label and axis fonts, a light grid, no bold grid lines.
trait HouseStyle {
    fn house_style(&mut self) -> &mut Self;
}

impl<X: Ranged, Y: Ranged, DB: DrawingBackend> HouseStyle for MeshStyle<'_, '_, X, Y, DB> {
    fn house_style(&mut self) -> &mut Self {
        self.label_style((FONT, 18))
            .axis_desc_style((FONT, 22))
            .light_line_style(GRID_COLOR)
            .bold_line_style(GRID_COLOR.mix(0.0))
    }
}

/// Draws the legend of every labelled series, in the house style, at `at`.
fn draw_legend<'a, DB: DrawingBackend + 'a, CT: CoordTranslate>(
    chart: &mut ChartContext<'a, DB, CT>,
    at: SeriesLabelPosition,
) -> PlotResult
where
    DB::ErrorType: 'static,
{
    chart
        .configure_series_labels()
        .position(at)
        .label_font((FONT, 18))
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK.mix(0.4))
        .draw()?;
    Ok(())
}

/// A thin vertical line from `y0` to `y1` at every blow onset time.
fn onset_lines(
    onsets: &[f64],
    y0: f64,
    y1: f64,
) -> impl Iterator<Item = PathElement<(f64, f64)>> + '_ {
    onsets
        .iter()
        .map(move |&t| PathElement::new(vec![(t, y0), (t, y1)], ONSET_COLOR.stroke_width(1)))
}

/// The blow number at the top of every onset line (every k-th when there are many, so the
/// numbers never overlap), in red where the nut did not advance.
fn onset_numbers<'a>(
    onsets: &'a [f64],
    advanced: &'a [bool],
    y: f64,
) -> impl Iterator<Item = Text<'a, (f64, f64), String>> + 'a {
    let every = onsets.len().div_ceil(30).max(1);
    onsets
        .iter()
        .enumerate()
        .filter(move |(k, _)| k % every == 0)
        .map(move |(k, &t)| {
            let colour: &'static RGBColor = if advanced.get(k).copied().unwrap_or(true) {
                &ONSET_TEXT_COLOR
            } else {
                &RATING_COLOR
            };
            Text::new(
                format!("{}", k + 1),
                (t, y),
                TextStyle::from((FONT, 15).into_font()).color(colour),
            )
        })
}

/// The torque caution along the foot of a plot that shows torque.
fn torque_note<DB: DrawingBackend>(foot: &DrawingArea<DB, Shift>) -> PlotResult
where
    DB::ErrorType: 'static,
{
    foot.draw_text(
        TORQUE_NOTE,
        &TextStyle::from((FONT, 16).into_font()).color(&RGBColor(90, 90, 90)),
        (18, 4),
    )?;
    Ok(())
}

/// The mesh of a nut-advance-per-blow chart: whole blow numbers on x, degrees on y.
fn nut_advance_mesh<DB: DrawingBackend>(
    chart: &mut ChartContext<'_, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>,
    blows: usize,
) -> PlotResult
where
    DB::ErrorType: 'static,
{
    chart
        .configure_mesh()
        .x_desc("blow number")
        .y_desc("nut advance (°)")
        .y_label_formatter(&|v| tick(*v))
        .x_labels(blows.clamp(1, 20) + 1)
        .x_label_formatter(&|x| {
            if (x - x.round()).abs() < 1e-6 && *x >= 1.0 {
                format!("{}", x.round() as i64)
            } else {
                String::new()
            }
        })
        .house_style()
        .draw()?;
    Ok(())
}

/// Writes the per-clip plots (`angles`, `twist_torque`, `nut_advance`, each as SVG and PNG)
/// into `dir` and returns their paths.
///
/// # Errors
/// [`Error::Io`] or [`Error::Output`] naming the file that could not be written.
pub fn write_plots(analysis: &Analysis, dir: &Path) -> Result<Vec<PathBuf>> {
    write_plots_with(analysis, dir, &ReportOptions::default())
}

/// As [`write_plots`], with torques in `opts.units`.
///
/// # Errors
/// As [`write_plots`].
pub fn write_plots_with(
    analysis: &Analysis,
    dir: &Path,
    opts: &ReportOptions,
) -> Result<Vec<PathBuf>> {
    let d = ClipPlotData::from_analysis(analysis, opts.units);
    let mut out = render(&AnglesPlot(&d), dir, "angles", CLIP_SIZE)?;
    out.extend(render(&TwistPlot(&d), dir, "twist_torque", CLIP_SIZE)?);
    out.extend(render(&AdvancePlot(&d), dir, "nut_advance", CLIP_SIZE)?);
    out.extend(render(
        &aligned::AlignedPlot(&d),
        dir,
        "blows_aligned",
        CLIP_SIZE,
    )?);
    Ok(out)
}

//! The batch comparison plot: torque per clip against the bar's rating, peak and holding
//! torque against blow rate (coloured by manifest group), and nut advance per blow across
//! clips.
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::path::{Path, PathBuf};

use plotters::prelude::*;

use super::*;

/// One analysed clip as the batch comparison plot shows it.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct ComparisonClip {
    /// Clip name.
    pub name: String,
    /// Highest peak torque, N·m.
    pub peak_torque_nm: Option<f64>,
    /// Peak torque on the last blow that still turned the nut, N·m.
    pub last_advancing_torque_nm: Option<f64>,
    /// The bar's rating, N·m.
    pub rating_nm: Option<f64>,
    /// Nut advance of each blow in order, degrees.
    pub nut_advance_deg: Vec<Option<f64>>,
    /// Blow rate, blows per minute.
    pub blow_rate_per_min: Option<f64>,
    /// The torque the joint holds after the last blow that turned the nut, N·m (the
    /// summary's `holding_torque_nm`; `None` when it could not be estimated), plotted beside
    /// the peak torque against the blow rate.
    pub holding_torque_nm: Option<f64>,
    /// The clip's group: its manifest tag values joined (`air / 6 bar`); clips of one group
    /// share a colour in the torque-against-blow-rate panel.
    pub group: Option<String>,
}

pub(super) struct ComparisonPlot<'a>(pub(super) &'a [ComparisonClip], pub(super) TorqueUnit);

fn short(name: &str, max: usize) -> String {
    if name.chars().count() <= max {
        name.to_string()
    } else {
        let head: String = name.chars().take(max - 1).collect();
        format!("{head}…")
    }
}

impl Plot for ComparisonPlot<'_> {
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> PlotResult
    where
        DB::ErrorType: 'static,
    {
        let (clips, unit) = (self.0, self.1);
        let u = |v: Option<f64>| v.map(|x| unit.of_nm(x));
        root.fill(&WHITE)?;
        let h = root.dim_in_pixel().1;
        let (top, rest) = root.split_vertically(h / 3);
        let (middle, rest) = rest.split_vertically(h / 3);
        let (bottom, foot) = rest.split_vertically(rest.dim_in_pixel().1 - 30);
        let n = clips.len();

        // Top: torques against the rating, per clip.
        let (_, t1) = span(
            clips.iter().flat_map(|c| {
                [c.peak_torque_nm, c.last_advancing_torque_nm, c.rating_nm]
                    .into_iter()
                    .flat_map(u)
            }),
            true,
        );
        // Headroom above the tallest bar for the legend.
        let t1 = t1 * 1.3;
        let names: Vec<String> = clips.iter().map(|c| short(&c.name, 18)).collect();
        let mut chart = ChartBuilder::on(&top)
            .caption("Torque per clip against the bar's rating", (FONT, 28))
            .margin(18)
            .x_label_area_size(50)
            .y_label_area_size(90)
            .build_cartesian_2d(-0.5..(n.max(1) as f64 - 0.5), 0.0..t1)?;
        let torque_desc = format!("torque ({}, model)", unit.label());
        chart
            .configure_mesh()
            .y_desc(torque_desc.as_str())
            .y_label_formatter(&|v| tick(*v))
            .x_labels(n.max(1) + 1)
            .x_label_formatter(&|x| {
                let i = x.round();
                if (x - i).abs() < 1e-6 && i >= 0.0 {
                    names.get(i as usize).cloned().unwrap_or_default()
                } else {
                    String::new()
                }
            })
            .disable_x_mesh()
            .house_style()
            .draw()?;
        let peak_color = RGBColor(31, 119, 180);
        let last_color = RGBColor(120, 180, 230);
        // Each series gets a legend entry only when some clip has a value for it.
        if clips.iter().any(|c| c.peak_torque_nm.is_some()) {
            chart
                .draw_series(clips.iter().enumerate().filter_map(|(i, c)| {
                    u(c.peak_torque_nm).map(|v| {
                        let x = i as f64;
                        Rectangle::new([(x - 0.38, 0.0), (x - 0.02, v)], peak_color.filled())
                    })
                }))?
                .label("peak torque")
                .legend(move |(x, y)| {
                    Rectangle::new([(x, y - 7), (x + 18, y + 7)], peak_color.filled())
                });
        }
        if clips.iter().any(|c| c.last_advancing_torque_nm.is_some()) {
            chart
                .draw_series(clips.iter().enumerate().filter_map(|(i, c)| {
                    u(c.last_advancing_torque_nm).map(|v| {
                        let x = i as f64;
                        Rectangle::new([(x + 0.02, 0.0), (x + 0.38, v)], last_color.filled())
                    })
                }))?
                .label("torque on the last advancing blow")
                .legend(move |(x, y)| {
                    Rectangle::new([(x, y - 7), (x + 18, y + 7)], last_color.filled())
                });
        }
        let rs = RATING_COLOR.stroke_width(3);
        if clips.iter().any(|c| c.rating_nm.is_some()) {
            chart
                .draw_series(clips.iter().enumerate().filter_map(|(i, c)| {
                    u(c.rating_nm).map(|r| {
                        let x = i as f64;
                        PathElement::new(vec![(x - 0.45, r), (x + 0.45, r)], rs)
                    })
                }))?
                .label("bar rating")
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 22, y)], rs));
        }
        draw_legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        if n == 0 {
            note_center(&top, "no clip was analysed")?;
        } else if clips.iter().all(|c| c.peak_torque_nm.is_none()) {
            note_center(
                &top,
                "no torque: no clip's rig has a bar, or no blows were found",
            )?;
        }

        rate_chart(&middle, clips, unit)?;

        // Bottom: nut advance per blow, one line per clip.
        let nb = clips
            .iter()
            .map(|c| c.nut_advance_deg.len())
            .max()
            .unwrap_or(0);
        let (a0, a1) = span(
            clips
                .iter()
                .flat_map(|c| c.nut_advance_deg.iter().flatten().copied()),
            true,
        );
        let mut chart = ChartBuilder::on(&bottom)
            .caption("Nut advance per blow", (FONT, 28))
            .margin(18)
            .x_label_area_size(60)
            .y_label_area_size(90)
            .build_cartesian_2d(0.5..(nb.max(1) as f64 + 0.5), a0..a1)?;
        nut_advance_mesh(&mut chart, nb)?;
        for (i, c) in clips.iter().enumerate() {
            let color = SERIES_COLORS[i % SERIES_COLORS.len()];
            let style = color.stroke_width(2);
            let pts: Vec<Option<f64>> = c.nut_advance_deg.clone();
            let xs: Vec<f64> = (1..=pts.len()).map(|b| b as f64).collect();
            let segs = runs(&xs, &pts);
            if segs.is_empty() {
                continue;
            }
            chart
                .draw_series(segs.iter().map(move |r| PathElement::new(r.clone(), style)))?
                .label(short(&c.name, 24))
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 22, y)], style));
            chart.draw_series(
                segs.iter()
                    .flatten()
                    .map(move |&p| Circle::new(p, 4, color.filled())),
            )?;
        }
        draw_legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        if nb == 0 {
            note_center(&bottom, "no blows found in any clip")?;
        }
        torque_note(&foot)?;
        Ok(())
    }
}

/// The comparison's middle panel: peak torque (and holding torque, when the summary carries
/// it) against blow rate, one labelled point per clip, the ratings as dashed lines. The blow
/// rate is what separates tools: a faster tool leaves the bar less time to spring back.
fn rate_chart<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    clips: &[ComparisonClip],
    unit: TorqueUnit,
) -> PlotResult
where
    DB::ErrorType: 'static,
{
    let u = |v: Option<f64>| v.map(|x| unit.of_nm(x));
    let with_rate: Vec<(&ComparisonClip, f64)> = clips
        .iter()
        .filter_map(|c| {
            c.blow_rate_per_min
                .filter(|r| r.is_finite())
                .map(|r| (c, r))
        })
        .collect();
    let (r0, r1) = span(with_rate.iter().map(|(_, r)| *r), false);
    let (_, t1) = span(
        with_rate.iter().flat_map(|(c, _)| {
            [c.peak_torque_nm, c.holding_torque_nm, c.rating_nm]
                .into_iter()
                .flat_map(u)
        }),
        true,
    );
    let mut chart = ChartBuilder::on(area)
        .caption("Peak and holding torque against blow rate", (FONT, 28))
        .margin(18)
        .x_label_area_size(60)
        .y_label_area_size(90)
        .build_cartesian_2d(r0..r1, 0.0..t1 * 1.25)?;
    let torque_desc = format!("torque ({}, model)", unit.label());
    chart
        .configure_mesh()
        .x_desc("blow rate (blows/min)")
        .y_desc(torque_desc.as_str())
        .x_label_formatter(&|v| tick(*v))
        .y_label_formatter(&|v| tick(*v))
        .house_style()
        .draw()?;
    let peak_color = RGBColor(31, 119, 180);
    let hold_color = RGBColor(44, 160, 44);
    let mut ratings: Vec<f64> = with_rate
        .iter()
        .filter_map(|(c, _)| u(c.rating_nm))
        .collect();
    ratings.sort_by(f64::total_cmp);
    ratings.dedup_by(|a, b| (*a - *b).abs() < 1e-9);
    if !ratings.is_empty() {
        let rs = RATING_COLOR.stroke_width(2);
        chart
            .draw_series(
                ratings
                    .iter()
                    .map(move |&r| PathElement::new(vec![(r0, r), (r1, r)], rs)),
            )?
            .label("bar rating")
            .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 22, y)], rs));
    }
    // Clips grouped by a manifest's tags get one colour per group; otherwise one colour.
    let mut groups: Vec<Option<&str>> = Vec::new();
    for (c, _) in &with_rate {
        if !groups.contains(&c.group.as_deref()) {
            groups.push(c.group.as_deref());
        }
    }
    for (g, group) in groups.iter().enumerate() {
        let colour = if group.is_some() {
            SERIES_COLORS[g % SERIES_COLORS.len()]
        } else {
            peak_color
        };
        let members: Vec<(f64, f64)> = with_rate
            .iter()
            .filter(|(c, _)| c.group.as_deref() == *group)
            .filter_map(|&(c, r)| u(c.peak_torque_nm).map(|t| (r, t)))
            .collect();
        if members.is_empty() {
            continue;
        }
        let label = match group {
            Some(name) => format!("peak torque, {}", short(name, 28)),
            None => "peak torque".to_string(),
        };
        chart
            .draw_series(
                members
                    .into_iter()
                    .map(move |p| Circle::new(p, 7, colour.filled())),
            )?
            .label(label)
            .legend(move |(x, y)| Circle::new((x + 11, y), 6, colour.filled()));
    }
    if with_rate.iter().any(|(c, _)| c.peak_torque_nm.is_some()) {
        chart.draw_series(with_rate.iter().filter_map(|&(c, r)| {
            u(c.peak_torque_nm).map(|t| {
                Text::new(
                    short(&c.name, 18),
                    (r, t),
                    TextStyle::from((FONT, 16).into_font()).color(&RGBColor(60, 60, 60)),
                )
            })
        }))?;
    }
    if with_rate.iter().any(|(c, _)| c.holding_torque_nm.is_some()) {
        chart
            .draw_series(with_rate.iter().filter_map(|&(c, r)| {
                u(c.holding_torque_nm).map(|t| TriangleMarker::new((r, t), 8, hold_color.filled()))
            }))?
            .label("holding torque")
            .legend(move |(x, y)| TriangleMarker::new((x + 11, y), 7, hold_color.filled()));
    }
    draw_legend(&mut chart, SeriesLabelPosition::UpperRight)?;
    if with_rate.is_empty() {
        note_center(area, "no clip has a blow rate (fewer than two blows)")?;
    } else if with_rate.iter().all(|(c, _)| c.peak_torque_nm.is_none()) {
        note_center(area, "no torque: no clip's rig has a bar")?;
    }
    Ok(())
}

/// Writes the batch comparison plot (`comparison.svg`, `comparison.png`) into `dir`.
///
/// # Errors
/// [`Error::Io`] or [`Error::Output`] naming the file that could not be written.
pub fn write_comparison(clips: &[ComparisonClip], dir: &Path) -> Result<Vec<PathBuf>> {
    write_comparison_with(clips, dir, &ReportOptions::default())
}

/// As [`write_comparison`], with torques in `opts.units`.
///
/// # Errors
/// As [`write_comparison`].
pub fn write_comparison_with(
    clips: &[ComparisonClip],
    dir: &Path,
    opts: &ReportOptions,
) -> Result<Vec<PathBuf>> {
    render(
        &ComparisonPlot(clips, opts.units),
        dir,
        "comparison",
        COMPARISON_SIZE,
    )
}

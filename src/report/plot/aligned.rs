//! The `blows_aligned` plot: every blow's twist against the time since its own onset, on one
//! chart, so blows can be compared directly (how high each winds the bar, how far it springs
//! back before the next). Torque = stiffness × twist on the right axis, on the twist axis's
//! own grid lines. Colours run from light (first blow) to dark (last); blows in which the nut
//! did not advance are grey and dashed.
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::{
    ClipPlotData, FONT, Plot, PlotResult, STALLED_COLOR, TWIST_COLOR, draw_legend, note_center,
    span, torque_note, twist_torque_axes,
};

pub(super) struct AlignedPlot<'a>(pub(super) &'a ClipPlotData);

/// The colour of blow `k` of `n`: light to dark along the twist colour.
fn shade(k: usize, n: usize) -> RGBColor {
    let f = if n > 1 {
        k as f64 / (n - 1) as f64
    } else {
        1.0
    };
    let mix = |c: u8| (255.0 - (255.0 - f64::from(c)) * (0.3 + 0.7 * f)).round() as u8;
    RGBColor(mix(TWIST_COLOR.0), mix(TWIST_COLOR.1), mix(TWIST_COLOR.2))
}

impl Plot for AlignedPlot<'_> {
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> PlotResult
    where
        DB::ErrorType: 'static,
    {
        let d = self.0;
        root.fill(&WHITE)?;
        let k = d.stiffness_nm_per_deg;
        let (plot_area, foot) = if k.is_some() {
            root.split_vertically(root.dim_in_pixel().1 - 30)
        } else {
            root.split_vertically(root.dim_in_pixel().1)
        };
        let x1 = d
            .aligned
            .iter()
            .flat_map(|b| b.points.last().map(|p| p.0))
            .fold(d.dt_ms.max(1e-3), f64::max);
        let (y0, y1) = span(
            d.aligned.iter().flat_map(|b| b.points.iter().map(|p| p.1)),
            true,
        );
        let mut chart = ChartBuilder::on(&plot_area)
            .caption(
                format!("{}: every blow lined up at its onset", d.name),
                (FONT, 28).into_font(),
            )
            .margin(18)
            .x_label_area_size(60)
            .y_label_area_size(90)
            .right_y_label_area_size(if k.is_some() { 100 } else { 0 })
            .build_cartesian_2d(0.0..x1, y0..y1)?
            .set_secondary_coord(0.0..x1, y0..y1);
        twist_torque_axes(&mut chart, "time since blow onset (ms)", k, d.unit)?;
        let n = d.aligned.len();
        for (j, b) in d.aligned.iter().enumerate() {
            let (index, pts) = (b.index, &b.points);
            if pts.is_empty() {
                continue;
            }
            if b.advanced {
                let style = shade(j, n).stroke_width(2);
                let series = chart.draw_series(LineSeries::new(pts.clone(), style))?;
                if j == 0 || j + 1 == n {
                    series
                        .label(format!("blow {index}"))
                        .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 22, y)], style));
                }
            } else {
                let style = STALLED_COLOR.stroke_width(2);
                let series = chart.draw_series(DashedLineSeries::new(pts.clone(), 6, 4, style))?;
                if d.aligned[..j].iter().all(|b| b.advanced) {
                    series
                        .label("nut did not advance")
                        .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 22, y)], style));
                }
            }
        }
        draw_legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        if k.is_some() {
            torque_note(&foot)?;
        }
        if d.aligned.iter().all(|b| b.points.is_empty()) {
            note_center(&plot_area, "no blows with both marks measured")?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn blows_shade_from_light_to_dark() {
        let first = shade(0, 5);
        let last = shade(4, 5);
        assert_eq!(last, TWIST_COLOR);
        assert!(first.0 > last.0 && first.2 > last.2);
        assert_eq!(shade(0, 1), TWIST_COLOR);
    }
}

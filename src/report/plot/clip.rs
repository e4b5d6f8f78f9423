//! The three per-clip plots: `angles` (drive and nut angle against time, blow onsets
//! marked), `twist_torque` (twist with torque = stiffness × twist on the right axis and the
//! rating as a line) and `nut_advance` (nut advance per blow as bars).
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use super::*;

pub(super) struct AnglesPlot<'a>(pub(super) &'a ClipPlotData);

impl Plot for AnglesPlot<'_> {
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> PlotResult
    where
        DB::ErrorType: 'static,
    {
        let d = self.0;
        root.fill(&WHITE)?;
        let (x0, x1) = time_range(d);
        let (y0, y1) = span(
            d.drive_deg.iter().chain(&d.nut_deg).flatten().copied(),
            true,
        );
        let mut chart = ChartBuilder::on(root)
            .caption(
                format!("{}: drive and nut angle", d.name),
                (FONT, 28).into_font(),
            )
            .margin(18)
            .x_label_area_size(60)
            .y_label_area_size(90)
            .build_cartesian_2d(x0..x1, y0..y1)?;
        chart
            .configure_mesh()
            .x_desc(d.axis.label())
            .y_desc("angle (°, tightening +)")
            .x_label_formatter(&|v| tick(*v))
            .y_label_formatter(&|v| tick(*v))
            .house_style()
            .draw()?;
        if !d.onsets.is_empty() {
            chart
                .draw_series(onset_lines(&d.onsets, y0, y1))?
                .label("blow onset")
                .legend(|(x, y)| {
                    PathElement::new(vec![(x + 10, y - 8), (x + 10, y + 8)], ONSET_COLOR)
                });
            chart.draw_series(onset_numbers(
                &d.onsets,
                &d.nut_advanced,
                y1 - 0.015 * (y1 - y0),
            ))?;
        }
        for (name, values, color) in [
            ("drive end", &d.drive_deg, DRIVE_COLOR),
            ("nut end", &d.nut_deg, NUT_COLOR),
        ] {
            let style = color.stroke_width(2);
            chart
                .draw_series(
                    runs(&d.t, values)
                        .into_iter()
                        .map(move |r| PathElement::new(r, style)),
                )?
                .label(name)
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 22, y)], style));
        }
        draw_legend(&mut chart, SeriesLabelPosition::UpperLeft)?;
        if d.t.is_empty() {
            note_center(root, "no frames analysed")?;
        } else if d.drive_deg.iter().chain(&d.nut_deg).all(Option::is_none) {
            note_center(root, "no mark was measured in any frame")?;
        }
        Ok(())
    }
}

pub(super) struct TwistPlot<'a>(pub(super) &'a ClipPlotData);

impl Plot for TwistPlot<'_> {
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> PlotResult
    where
        DB::ErrorType: 'static,
    {
        let d = self.0;
        root.fill(&WHITE)?;
        let (x0, x1) = time_range(d);
        let k = d.stiffness_nm_per_deg;
        let rating_deg = match (d.rating_nm, k) {
            (Some(r), Some(k)) => Some(r / k),
            _ => None,
        };
        let (y0, y1) = span(
            d.twist_deg.iter().flatten().copied().chain(rating_deg),
            true,
        );
        let title = match k {
            Some(_) => format!("{}: twist and torque", d.name),
            None => format!("{}: twist (no bar in the rig, so no torque)", d.name),
        };
        let (plot_area, foot) = if k.is_some() {
            root.split_vertically(root.dim_in_pixel().1 - 30)
        } else {
            root.split_vertically(root.dim_in_pixel().1)
        };
        let mut chart = ChartBuilder::on(&plot_area)
            .caption(title, (FONT, 28).into_font())
            .margin(18)
            .x_label_area_size(60)
            .y_label_area_size(90)
            .right_y_label_area_size(if k.is_some() { 100 } else { 0 })
            .build_cartesian_2d(x0..x1, y0..y1)?
            // The torque axis shares the twist axis's coordinates and ticks, labelled with
            // stiffness × twist, so each torque label sits on a twist grid line.
            .set_secondary_coord(x0..x1, y0..y1);
        twist_torque_axes(&mut chart, &d.axis.label(), k, d.unit)?;
        if !d.onsets.is_empty() {
            chart.draw_series(onset_lines(&d.onsets, y0, y1))?;
            chart.draw_series(onset_numbers(
                &d.onsets,
                &d.nut_advanced,
                y1 - 0.015 * (y1 - y0),
            ))?;
        }
        let style = TWIST_COLOR.stroke_width(2);
        chart
            .draw_series(
                runs(&d.t, &d.twist_deg)
                    .into_iter()
                    .map(move |r| PathElement::new(r, style)),
            )?
            .label("twist")
            .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 22, y)], style));
        if !d.peaks.is_empty() {
            chart
                .draw_series(
                    d.peaks
                        .iter()
                        .map(|&p| Circle::new(p, 5, TWIST_COLOR.filled())),
                )?
                .label("peak twist of a blow")
                .legend(|(x, y)| Circle::new((x + 11, y), 5, TWIST_COLOR.filled()));
        }
        if let (Some(r), Some(k)) = (d.rating_nm, k) {
            let rs = RATING_COLOR.stroke_width(2);
            let r_deg = r / k;
            chart
                .draw_series(LineSeries::new(vec![(x0, r_deg), (x1, r_deg)], rs))?
                .label(format!(
                    "rating {} {}",
                    tick_sig(d.unit.of_nm(r), 3),
                    d.unit.label()
                ))
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 22, y)], rs));
        }
        draw_legend(&mut chart, SeriesLabelPosition::UpperLeft)?;
        if k.is_some() {
            torque_note(&foot)?;
        }
        if d.twist_deg.iter().all(Option::is_none) {
            note_center(&plot_area, "no frame with both marks measured")?;
        }
        Ok(())
    }
}

pub(super) struct AdvancePlot<'a>(pub(super) &'a ClipPlotData);

impl Plot for AdvancePlot<'_> {
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> PlotResult
    where
        DB::ErrorType: 'static,
    {
        let d = self.0;
        root.fill(&WHITE)?;
        let n = d.nut_advance_deg.iter().map(|b| b.0).max().unwrap_or(0);
        let (y0, y1) = span(d.nut_advance_deg.iter().filter_map(|b| b.1), true);
        let mut chart = ChartBuilder::on(root)
            .caption(
                format!("{}: nut advance per blow", d.name),
                (FONT, 28).into_font(),
            )
            .margin(18)
            .x_label_area_size(60)
            .y_label_area_size(90)
            .build_cartesian_2d(0.5..(n.max(1) as f64 + 0.5), y0..y1)?;
        nut_advance_mesh(&mut chart, n)?;
        let advanced = |i: usize| {
            d.nut_advanced
                .get(i.wrapping_sub(1))
                .copied()
                .unwrap_or(true)
        };
        chart.draw_series(d.nut_advance_deg.iter().filter_map(|&(i, v)| {
            v.filter(|_| advanced(i)).map(|v| {
                let x = i as f64;
                Rectangle::new([(x - 0.35, 0.0), (x + 0.35, v)], NUT_COLOR.filled())
            })
        }))?;
        // Blows in which the nut did not advance: a grey bar and a cross at its foot.
        if d.nut_advance_deg
            .iter()
            .any(|&(i, v)| v.is_some() && !advanced(i))
        {
            chart
                .draw_series(d.nut_advance_deg.iter().filter_map(|&(i, v)| {
                    v.filter(|_| !advanced(i)).map(|v| {
                        let x = i as f64;
                        Rectangle::new([(x - 0.35, 0.0), (x + 0.35, v)], STALLED_COLOR.filled())
                    })
                }))?
                .label("nut did not advance")
                .legend(|(x, y)| Cross::new((x + 10, y), 7, RATING_COLOR.stroke_width(3)));
            chart.draw_series(d.nut_advance_deg.iter().filter_map(|&(i, v)| {
                v.filter(|_| !advanced(i))
                    .map(|_| Cross::new((i as f64, 0.0), 9, RATING_COLOR.stroke_width(3)))
            }))?;
            draw_legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        }
        chart.draw_series(std::iter::once(PathElement::new(
            vec![(0.5, 0.0), (n.max(1) as f64 + 0.5, 0.0)],
            BLACK.stroke_width(1),
        )))?;
        if d.nut_advance_deg.is_empty() {
            note_center(root, "no blows found")?;
        }
        Ok(())
    }
}

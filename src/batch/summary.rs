//! A batch's summary: one row per clip (measured or failed), `summary.csv`, `summary.json`,
//! the comparison plot's data and the table printed at the end.
//!
//! Part of `batch` (runs `analyze` and the report writer per clip): it must never import
//! `find_marks` or the CLI.

use super::*;

/// The summary row of an analysed clip.
pub(super) fn ok_row(
    clip: &Clip,
    rig: &Rig,
    rig_path: &Path,
    analysis: &crate::Analysis,
) -> SummaryRow {
    let s = &analysis.summary;
    SummaryRow {
        clip: clip.name.clone(),
        status: Status::Ok,
        error: None,
        path: clip.path.display().to_string(),
        rig: rig_path.display().to_string(),
        fps_hz: Some(analysis.time_base.fps_hz()),
        frames: Some(analysis.trace.len()),
        blow_count: Some(s.blow_count),
        blow_rate_per_min: s.blow_rate_per_min,
        drive_total_deg: s.drive_total.map(|a| a.deg()),
        nut_total_deg: s.nut_total.map(|a| a.deg()),
        bar_stiffness_nm_per_deg: s.stiffness.map(|k| k.nm_per_deg()),
        holding_torque_nm: s.holding.map(|h| h.torque.nm()),
        holding_torque_ci95_low_nm: s.holding.map(|h| h.ci95.0.nm()),
        holding_torque_ci95_high_nm: s.holding.map(|h| h.ci95.1.nm()),
        twist_zero_source: Some(s.twist_zero.source.as_str().to_string()),
        peak_torque_nm: s.peak_torque.map(|t| t.nm()),
        last_advancing_torque_nm: analysis
            .blows
            .iter()
            .rev()
            .find(|b| b.nut_advanced)
            .and_then(|b| b.peak_torque)
            .map(|t| t.nm()),
        residual_twist_deg: median_residual_deg(analysis),
        stress_margin_pct: analysis
            .bar
            .as_ref()
            .zip(s.peak_torque)
            .and_then(|(b, t)| b.max_stress_ratio(t))
            .map(|(_, ratio)| 100.0 * (1.0 - ratio)),
        rating_nm: rig.bar.as_ref().and_then(|b| b.rating_nm),
        warning_count: Some(analysis.warnings.len()),
        blow_rate_spread_per_min: s.blow_rate_spread_per_min.filter(|x| x.is_finite()),
        stiffness_source: s.stiffness_source.map(|x| x.as_str().to_string()),
        springback_verdict: analysis.springback.as_ref().and_then(|v| {
            v.measured
                .and_then(|m| serde_json::to_value(m).ok())
                .and_then(|m| m.as_str().map(str::to_string))
        }),
        springback_model_agrees: analysis.springback.as_ref().and_then(|v| v.agrees),
        peak_torque_lbf_ft: s.peak_torque.map(|t| t.lbf_ft()),
        last_advancing_torque_lbf_ft: analysis
            .blows
            .iter()
            .rev()
            .find(|b| b.nut_advanced)
            .and_then(|b| b.peak_torque)
            .map(|t| t.lbf_ft()),
        tags: clip.tags.iter().cloned().collect(),
    }
}

/// Median twist left just before the next blow, over every blow that has a next blow (the
/// last blow's residual is taken at the clip's end, so it is left out unless it is the only
/// one); degrees.
pub(super) fn median_residual_deg(analysis: &crate::Analysis) -> Option<f64> {
    let n = analysis.blows.len();
    let take = if n > 1 { n - 1 } else { n };
    let v: Vec<f64> = analysis.blows[..take]
        .iter()
        .filter_map(|b| b.residual_twist.map(|a| a.deg()))
        .collect();
    crate::stats::median(&v)
}

pub(super) fn one_line(s: &str) -> String {
    s.split_whitespace().collect::<Vec<_>>().join(" ")
}

pub(super) fn failed_row(clip: &Clip, rig: &str, error: String) -> SummaryRow {
    SummaryRow {
        clip: clip.name.clone(),
        status: Status::Failed,
        error: Some(error),
        path: clip.path.display().to_string(),
        rig: rig.to_string(),
        fps_hz: None,
        frames: None,
        blow_count: None,
        blow_rate_per_min: None,
        drive_total_deg: None,
        nut_total_deg: None,
        bar_stiffness_nm_per_deg: None,
        holding_torque_nm: None,
        holding_torque_ci95_low_nm: None,
        holding_torque_ci95_high_nm: None,
        twist_zero_source: None,
        peak_torque_nm: None,
        last_advancing_torque_nm: None,
        residual_twist_deg: None,
        rating_nm: None,
        stress_margin_pct: None,
        warning_count: None,
        blow_rate_spread_per_min: None,
        stiffness_source: None,
        springback_verdict: None,
        springback_model_agrees: None,
        peak_torque_lbf_ft: None,
        last_advancing_torque_lbf_ft: None,
        tags: clip.tags.iter().cloned().collect(),
    }
}

pub(super) fn fail(clip: &Clip, rig: &str, error: String) -> ClipOutcome {
    let row = failed_row(clip, rig, error);
    ClipOutcome {
        clip: clip.clone(),
        row,
        blows: Vec::new(),
        warnings: Vec::new(),
        written: Vec::new(),
    }
}

/// The per-clip data the comparison plot needs, for clips that were analysed.
pub(super) fn comparison(outcomes: &[ClipOutcome]) -> Vec<report::plot::ComparisonClip> {
    outcomes
        .iter()
        .filter(|o| o.row.status == Status::Ok)
        .map(|o| report::plot::ComparisonClip {
            name: o.row.clip.clone(),
            peak_torque_nm: o.row.peak_torque_nm,
            last_advancing_torque_nm: o.row.last_advancing_torque_nm,
            blow_rate_per_min: o.row.blow_rate_per_min,
            holding_torque_nm: o.row.holding_torque_nm,
            group: (!o.clip.tags.is_empty()).then(|| {
                o.clip
                    .tags
                    .iter()
                    .map(|(_, v)| v.as_str())
                    .collect::<Vec<_>>()
                    .join(" / ")
            }),
            rating_nm: o.row.rating_nm,
            nut_advance_deg: o
                .blows
                .iter()
                .map(|b| b.nut_advance.map(|a| a.deg()))
                .collect(),
        })
        .collect()
}

/// Writes `summary.csv` and `summary.json` into `out`.
///
/// # Errors
/// [`Error::Io`] naming the file.
pub fn write_summary(outcomes: &[ClipOutcome], out: &Path) -> Result<Vec<PathBuf>> {
    let csv_path = out.join("summary.csv");
    let bytes = summary_csv(outcomes).map_err(|e| csv_err(&csv_path, e))?;
    report::write_atomic(&csv_path, &bytes)?;

    let json_path = out.join("summary.json");
    let doc = SummaryFile {
        summary_version: 1,
        torque_note: crate::mechanics::TORQUE_CAUTION.to_string(),
        clips: outcomes.iter().map(|o| o.row.clone()).collect(),
    };
    let text = serde_json::to_string_pretty(&doc).map_err(|e| Error::Output {
        path: json_path.clone(),
        reason: e.to_string(),
    })?;
    report::write_atomic(&json_path, (text + "\n").as_bytes())?;
    Ok(vec![csv_path, json_path])
}

/// The tag names of a batch, in the manifest's column order (first clip that has each).
pub fn tag_names(outcomes: &[ClipOutcome]) -> Vec<String> {
    let mut names: Vec<String> = Vec::new();
    for o in outcomes {
        for (k, _) in &o.clip.tags {
            if !names.contains(k) {
                names.push(k.clone());
            }
        }
    }
    names
}

/// The text of `summary.csv`: the row fields as serde names them, with each manifest tag as
/// a column of its own after `clip`.
pub(super) fn summary_csv(outcomes: &[ClipOutcome]) -> std::result::Result<Vec<u8>, csv::Error> {
    let tags = tag_names(outcomes);
    let mut w = csv::Writer::from_writer(Vec::new());
    for (i, o) in outcomes.iter().enumerate() {
        // One row through serde (tags left out: csv cannot write a map), read back as fields.
        let mut row = o.row.clone();
        row.tags.clear();
        let mut one = csv::Writer::from_writer(Vec::new());
        one.serialize(&row)?;
        let text = one.into_inner().map_err(|e| e.into_error())?;
        let mut rd = csv::Reader::from_reader(text.as_slice());
        let header = rd.headers()?.clone();
        let record = rd.records().next().transpose()?.unwrap_or_default();
        let splice = |r: &csv::StringRecord, extra: Vec<&str>| -> csv::StringRecord {
            let mut out = csv::StringRecord::new();
            out.push_field(r.get(0).unwrap_or(""));
            extra.iter().for_each(|x| out.push_field(x));
            r.iter().skip(1).for_each(|x| out.push_field(x));
            out
        };
        if i == 0 {
            w.write_record(&splice(&header, tags.iter().map(String::as_str).collect()))?;
        }
        let values = tags
            .iter()
            .map(|t| o.row.tags.get(t).map_or("", String::as_str))
            .collect();
        w.write_record(&splice(&record, values))?;
    }
    w.into_inner().map_err(|e| e.into_error().into())
}

pub(super) fn csv_err(path: &Path, e: csv::Error) -> Error {
    match e.into_kind() {
        csv::ErrorKind::Io(io) => Error::io(path, io),
        other => Error::Output {
            path: path.to_path_buf(),
            reason: format!("{other:?}"),
        },
    }
}

pub(super) fn fmt_opt(v: Option<f64>, prec: usize) -> String {
    v.map_or_else(|| "-".to_string(), |x| format!("{x:.prec$}"))
}

/// The batch's terminal summary: one line per analysed clip in folder order, then the failed
/// clips with their reasons, then a count and the torque caution.
pub fn summary_table(report: &BatchReport) -> String {
    let ok: Vec<&SummaryRow> = report
        .outcomes
        .iter()
        .map(|o| &o.row)
        .filter(|r| r.status == Status::Ok)
        .collect();
    let failed: Vec<&SummaryRow> = report
        .outcomes
        .iter()
        .map(|o| &o.row)
        .filter(|r| r.status == Status::Failed)
        .collect();
    let width = report
        .outcomes
        .iter()
        .map(|o| o.row.clip.chars().count())
        .max()
        .unwrap_or(4)
        .max(4);
    let mut s = String::new();
    if !ok.is_empty() {
        s.push_str(&format!(
            "{:<width$}  {:>6}  {:>6}  {:>10}  {:>10}  {:>10}  {:>10}  {:>10}  {:>9}\n",
            "clip",
            "status",
            "blows",
            "rate /min",
            "nut total°",
            "hold N·m",
            "peak N·m",
            "last N·m",
            "rating",
        ));
        for r in &ok {
            s.push_str(&format!(
                "{:<width$}  {:>6}  {:>6}  {:>10}  {:>10}  {:>10}  {:>10}  {:>10}  {:>9}\n",
                r.clip,
                "ok",
                r.blow_count.map_or("-".into(), |n| n.to_string()),
                fmt_opt(r.blow_rate_per_min, 0),
                fmt_opt(r.nut_total_deg, 1),
                fmt_opt(r.holding_torque_nm, 1),
                fmt_opt(r.peak_torque_nm, 1),
                fmt_opt(r.last_advancing_torque_nm, 1),
                fmt_opt(r.rating_nm, 0),
            ));
        }
    }
    for r in &failed {
        s.push_str(&format!(
            "{:<width$}  failed: {}\n",
            r.clip,
            r.error.as_deref().unwrap_or("unknown reason")
        ));
    }
    s.push_str(&format!(
        "{} clip(s): {} ok, {} failed\n",
        report.outcomes.len(),
        ok.len(),
        failed.len()
    ));
    if ok.iter().any(|r| r.peak_torque_nm.is_some()) {
        s.push_str(&format!("note: {}\n", crate::mechanics::TORQUE_CAUTION));
    }
    s
}

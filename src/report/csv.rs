//! `blows.csv` (one row per blow) and `trace.csv` (one row per analysed frame). Headers carry
//! the unit of every number; an unknown value is an empty cell. Columns are the report.json
//! fields of the same names.
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::fmt::Write;

use super::cell;
use super::json::{BlowJson, Report};

/// Header of `blows.csv`.
pub(crate) const BLOWS_HEADER: &str = "index,frame,t_s,drive_advance_deg,nut_advance_deg,\
peak_twist_deg,peak_torque_nm,peak_torque_lbf_ft,residual_twist_deg,residual_torque_nm,\
nut_lag_ms,nut_onset_frame,breakaway_twist_deg,breakaway_torque_nm,nut_advanced";

/// Header of `trace.csv`.
pub(crate) const TRACE_HEADER: &str =
    "t_s,frame,drive_deg,nut_deg,twist_deg,drive_confidence,nut_confidence";

/// The text of `blows.csv`.
pub(crate) fn blows_csv(r: &Report) -> String {
    let mut out = String::from(BLOWS_HEADER);
    out.push('\n');
    for b in r.blows.iter().cloned() {
        let BlowJson {
            index,
            frame,
            t_s,
            drive_advance_deg,
            nut_advance_deg,
            peak_twist_deg,
            peak_torque_nm,
            residual_twist_deg,
            nut_lag_ms,
            peak_torque_lbf_ft,
            residual_torque_nm,
            nut_onset_frame,
            breakaway_twist_deg,
            breakaway_torque_nm,
            nut_advanced,
            // The intervals and rise are in report.json.
            ..
        } = b;
        let _ = writeln!(
            out,
            "{index},{frame},{},{},{},{},{},{},{},{},{},{},{},{},{nut_advanced}",
            cell(Some(t_s), 9),
            cell(drive_advance_deg, 6),
            cell(nut_advance_deg, 6),
            cell(peak_twist_deg, 6),
            cell(peak_torque_nm, 4),
            cell(peak_torque_lbf_ft, 4),
            cell(residual_twist_deg, 6),
            cell(residual_torque_nm, 4),
            cell(nut_lag_ms, 6),
            nut_onset_frame.map(|f| f.to_string()).unwrap_or_default(),
            cell(breakaway_twist_deg, 6),
            cell(breakaway_torque_nm, 4),
        );
    }
    out
}

/// The text of `trace.csv`.
pub(crate) fn trace_csv(r: &Report) -> String {
    let t = &r.trace;
    let mut out = String::with_capacity(64 * (t.t_s.len() + 1));
    out.push_str(TRACE_HEADER);
    out.push('\n');
    for i in 0..t.t_s.len() {
        let _ = writeln!(
            out,
            "{},{},{},{},{},{},{}",
            cell(Some(t.t_s[i]), 9),
            t.frame[i],
            cell(t.drive_deg[i], 6),
            cell(t.nut_deg[i], 6),
            cell(t.twist_deg[i], 6),
            cell(Some(t.drive_confidence[i]), 3),
            cell(Some(t.nut_confidence[i]), 3),
        );
    }
    out
}

#[cfg(test)]
mod tests {
    use super::super::json::report;
    use super::super::tests::analysis;
    use super::*;

    #[test]
    fn blows_csv_has_one_row_per_blow_and_matches_the_report() {
        let a = analysis(true);
        let text = blows_csv(&report(&a));
        let mut rd = ::csv::Reader::from_reader(text.as_bytes());
        let header: Vec<String> = rd.headers().unwrap().iter().map(String::from).collect();
        assert_eq!(header.join(","), BLOWS_HEADER);
        let rows: Vec<::csv::StringRecord> = rd.records().map(Result::unwrap).collect();
        assert_eq!(rows.len(), a.blows.len());
        for (r, b) in rows.iter().zip(&a.blows) {
            let adv: f64 = r[4].parse().unwrap();
            assert!((adv - b.nut_advance.unwrap().deg()).abs() < 1e-6);
            let q: f64 = r[6].parse().unwrap();
            assert!((q - b.peak_torque.unwrap().nm()).abs() < 1e-4);
        }
    }

    #[test]
    fn trace_csv_has_empty_cells_where_a_mark_was_lost() {
        let a = analysis(false);
        let text = trace_csv(&report(&a));
        let mut rd = ::csv::Reader::from_reader(text.as_bytes());
        assert_eq!(
            rd.headers().unwrap().iter().collect::<Vec<_>>().join(","),
            TRACE_HEADER
        );
        let rows: Vec<::csv::StringRecord> = rd.records().map(Result::unwrap).collect();
        assert_eq!(rows.len(), a.trace.len());
        assert_eq!(&rows[3][2], "");
        assert_eq!(&rows[3][4], "");
        assert_ne!(&rows[3][3], "");
        assert_eq!(&rows[0][2], "0.000000");
    }
}

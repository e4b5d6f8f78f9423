//! Stage 5, report: `report.html`, the one page a lab files for one clip (interface v2,
//! "Reports to read and file").
//!
//! In: an [`Analysis`] and the [`Report`] written as `report.json`. Out: one self-contained
//! HTML file: inline CSS, inline SVG plots and the frame thumbnail as a `data:` URI; no
//! scripts, fonts or anything else fetched, so it opens offline and prints on A4. Templated
//! with maud, which escapes every text it inserts.
//!
//! The page is built from the report document as JSON values, so a field other stages add
//! (`peak_torque_ci95_nm`, `summary.holding_torque_nm`) appears as soon as it exists. Every
//! number in the blow table carries the value exactly as `report.json` writes it in
//! `data-value` (with `data-key` and `data-blow`), beside the rounded text a person reads.
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use maud::{DOCTYPE, Markup, PreEscaped, html};
use serde_json::Value;

use super::display::{ReportOptions, TorqueUnit, fixed};
use super::json::Report;
use crate::analyze::Analysis;

/// The page's style: screen and A4 print, system fonts only.
pub(crate) const CSS: &str = r#"
@page { size: A4; margin: 12mm; }
:root { color-scheme: light; }
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, "DejaVu Sans", sans-serif;
       color: #1a1a1a; background: #fff; margin: 0 auto; max-width: 190mm; padding: 8mm 6mm;
       font-size: 10.5pt; line-height: 1.35; }
h1 { font-size: 17pt; margin: 0 0 2mm; }
h2 { font-size: 12.5pt; margin: 6mm 0 2mm; border-bottom: 1px solid #bbb; padding-bottom: 1mm;
     break-after: avoid; }
p.meta { color: #555; margin: 0 0 3mm; }
table { border-collapse: collapse; width: 100%; margin: 1mm 0 3mm; font-variant-numeric: tabular-nums; }
th, td { border: 1px solid #ccc; padding: 1mm 1.6mm; text-align: right; vertical-align: top; }
th { background: #f1f1f1; font-weight: 600; }
td.text, th.text { text-align: left; }
table.kv th { text-align: left; width: 34%; }
table.kv td { text-align: left; }
tr { break-inside: avoid; }
table.blows, table.clips, table.groups { font-size: 8.5pt; }
table.blows th, table.clips th { hyphens: auto; overflow-wrap: anywhere; }
tr.stalled td { background: #fff4e0; }
.caution { border: 2px solid #b00; background: #fff3f3; padding: 2.5mm 3mm; margin: 3mm 0;
           break-inside: avoid; }
.caution strong { color: #900; }
.verdict { border-left: 4px solid #555; padding: 1mm 3mm; background: #f7f7f7; }
ul.warnings li { margin: 0.6mm 0; }
figure { margin: 2mm 0 4mm; break-inside: avoid; }
figure img { max-width: 100%; height: auto; border: 1px solid #ccc; }
figure svg { width: 100%; height: auto; display: block; border: 1px solid #eee; }
figcaption { color: #444; font-size: 9.5pt; margin-top: 1mm; }
code { font-family: ui-monospace, "DejaVu Sans Mono", monospace; font-size: 9pt;
       overflow-wrap: anywhere; }
footer { margin-top: 6mm; color: #666; font-size: 9pt; }
@media print { body { padding: 0; max-width: none; } a { color: inherit; text-decoration: none; } }
"#;

/// A column of the blow table.
struct Column {
    /// The key in `report.json`'s blow objects.
    key: &'static str,
    /// Header text.
    head: &'static str,
    /// Unit shown under the header; `None` for torque columns (the chosen unit).
    unit: Option<&'static str>,
    /// Decimals shown.
    decimals: usize,
}

/// The blow table's columns. Torque columns hold N·m in `report.json` and are shown in the
/// unit chosen with `--units`.
const COLUMNS: [Column; 9] = [
    col("t_s", "time", Some("s"), 4),
    col("drive_advance_deg", "drive advance", Some("°"), 2),
    col("nut_advance_deg", "nut advance", Some("°"), 2),
    col("peak_twist_deg", "peak twist", Some("°"), 2),
    col("peak_torque_nm", "peak torque", None, 1),
    col("residual_twist_deg", "residual twist", Some("°"), 2),
    col("residual_torque_nm", "residual torque", None, 1),
    col("breakaway_torque_nm", "torque when nut moved", None, 1),
    col("nut_lag_ms", "nut lag", Some("ms"), 2),
];

const fn col(
    key: &'static str,
    head: &'static str,
    unit: Option<&'static str>,
    d: usize,
) -> Column {
    Column {
        key,
        head,
        unit,
        decimals: d,
    }
}

/// Whether a key holds a torque in N·m (shown in the chosen unit).
fn is_torque(key: &str) -> bool {
    key.ends_with("_nm")
}

/// The text of a value as `report.json` writes it (serde_json's shortest round-trip form).
pub(crate) fn json_text(v: &Value) -> String {
    serde_json::to_string(v).unwrap_or_default()
}

/// A number cell: rounded text for people, the exact `report.json` value in `data-value`.
fn num_cell(v: &Value, key: &str, blow: &str, decimals: usize, units: TorqueUnit) -> Markup {
    let x = v.as_f64();
    let shown = if is_torque(key) {
        x.map(|x| units.of_nm(x))
    } else {
        x
    };
    html! {
        td data-blow=(blow) data-key=(key) data-value=(json_text(v)) { (fixed(shown, decimals)) }
    }
}

/// A `[low, high]` interval cell, or nothing when the report has none for this key.
fn interval(v: &Value, decimals: usize, scale: impl Fn(f64) -> f64) -> Option<String> {
    let a = v.as_array()?;
    let (lo, hi) = (a.first()?.as_f64()?, a.get(1)?.as_f64()?);
    Some(format!(
        "{} – {}",
        fixed(Some(scale(lo)), decimals),
        fixed(Some(scale(hi)), decimals)
    ))
}

/// The shared page frame: head with the style, then `body`.
pub(crate) fn page(title: &str, body: Markup) -> Markup {
    html! {
        (DOCTYPE)
        html lang="en" {
            head {
                meta charset="utf-8";
                meta name="viewport" content="width=device-width, initial-scale=1";
                meta name="generator" content=(format!("twistmark {}", env!("CARGO_PKG_VERSION")));
                title { (title) }
                style { (PreEscaped(CSS)) }
            }
            body { (body) }
        }
    }
}

/// The caution box every page with a torque carries.
pub(crate) fn caution() -> Markup {
    html! {
        div.caution role="note" {
            strong { "Caution. " }
            (super::CAUTION)
            " Follow the maker's pattern and dry or oiled condition, and re-check after the distance the maker gives. "
            "Use impact-rated sockets and extensions only, and wear eye and hearing protection. "
            "Local codes and licensed practice come first."
        }
    }
}

/// An SVG document from plotters, ready to sit inside HTML: the XML declaration dropped and a
/// `viewBox` added when missing, so CSS can scale it to the page width.
pub(crate) fn inline_svg(svg: &str) -> String {
    let s = svg.trim_start();
    let s = match s.strip_prefix("<?xml") {
        Some(rest) => rest.split_once("?>").map_or(s, |(_, r)| r.trim_start()),
        None => s,
    };
    if s.contains("viewBox") {
        return s.to_string();
    }
    let attr = |name: &str| -> Option<String> {
        let head = s.split_once('>')?.0;
        let at = head.find(&format!(" {name}=\""))? + name.len() + 3;
        let end = head[at..].find('"')? + at;
        Some(head[at..end].to_string())
    };
    match (attr("width"), attr("height")) {
        (Some(w), Some(h)) => s.replacen("<svg ", &format!("<svg viewBox=\"0 0 {w} {h}\" "), 1),
        _ => s.to_string(),
    }
}

/// One row of a key–value table; nothing when `value` is empty.
fn kv(key: &str, value: Option<String>) -> Markup {
    html! {
        @if let Some(v) = value {
            tr { th { (key) } td { (v) } }
        }
    }
}

/// A torque in N·m from the report, shown in the chosen unit with `decimals`.
fn torque_text(v: &Value, units: TorqueUnit, decimals: usize) -> Option<String> {
    v.as_f64().map(|x| {
        format!(
            "{} {}",
            fixed(Some(units.of_nm(x)), decimals),
            units.label()
        )
    })
}

fn num_text(v: &Value, decimals: usize, unit: &str) -> Option<String> {
    v.as_f64()
        .map(|x| format!("{} {unit}", fixed(Some(x), decimals)))
}

/// The rig's marks, one row each.
fn marks_table(rig: &Value) -> Markup {
    let marks = rig.get("marks").and_then(Value::as_object);
    html! {
        table {
            tr {
                th.text { "mark" } th.text { "kind" } th.text { "where (px)" }
                th.text { "tightening" } th.text { "oblique disc" }
            }
            @for (role, m) in marks.into_iter().flatten() {
                tr {
                    td.text { (role) }
                    td.text { (m.get("kind").and_then(Value::as_str).unwrap_or("radial")) }
                    td.text {
                        @if let Some(p) = m.get("pivot") {
                            "pivot " (json_text(p))
                            @if let Some(r) = m.get("radius") { ", annulus " (json_text(r)) }
                        } @else if let Some(ax) = m.get("axis") {
                            "axis " (json_text(ax))
                            @if let Some(r) = m.get("radius_px") { ", radius " (json_text(r)) }
                        }
                    }
                    td.text { (m.get("tighten").and_then(Value::as_str).unwrap_or("–")) }
                    td.text {
                        @if let Some(e) = m.get("ellipse") { (json_text(e)) } @else { "–" }
                    }
                }
            }
        }
    }
}

/// The bar: sections, steel, stiffness and where it came from, rating and stress.
fn bar_block(r: &Value, units: TorqueUnit) -> Markup {
    let bar = &r["bar"];
    let rig_bar = &r["rig"]["bar"];
    if bar.is_null() {
        return html! {
            p { "The rig has no " code { "bar" } ", so no torque is computed: angles, blows and twist only." }
        };
    }
    let k = bar["stiffness_nm_per_deg"].as_f64();
    let source = bar["stiffness_source"].as_str().unwrap_or("computed");
    let source_text = if source == "calibrated" {
        let mut t =
            "calibrated against a torque reference (the rig's calibrated_stiffness_nm_per_deg)"
                .to_string();
        let cal = &rig_bar["calibration"];
        if let Some(n) = cal["pairs"].as_u64() {
            t.push_str(&format!(", {n} check(s)"));
        }
        if let Some(d) = cal["date"].as_str() {
            t.push_str(&format!(", on {d}"));
        }
        if let Some(w) = cal["reference_wrench"].as_str() {
            t.push_str(&format!(", reference wrench: {w}"));
        }
        if let Some(e) = bar["calibration_stderr_nm_per_deg"].as_f64() {
            t.push_str(&format!(
                "; standard uncertainty {} {}/°",
                fixed(Some(units.of_nm(e)), 3),
                units.label()
            ));
        }
        if let Some(p) = bar["calibrated_vs_computed_pct"].as_f64() {
            t.push_str(&format!(
                "; {} % from the computed value",
                fixed(Some(p), 1)
            ));
        }
        t
    } else {
        "computed from the sections and the steel's shear modulus (torsion formulas and their \
         sources: docs/mechanics.md)"
            .to_string()
    };
    let sections = bar["sections"].as_array();
    html! {
        table.kv {
            (kv("stiffness used for torque", k.map(|k| format!(
                "{} {}/° ({} N·m/rad)", fixed(Some(units.of_nm(k)), 3), units.label(),
                fixed(bar["stiffness_nm_per_rad"].as_f64(), 1)))))
            tr { th { "stiffness source" } td data-key="stiffness_source" { (source_text) } }
            (kv("computed from the sections", bar["computed_stiffness_nm_per_deg"].as_f64().map(|c|
                format!("{} {}/°", fixed(Some(units.of_nm(c)), 3), units.label()))))
            (kv("rating", torque_text(&bar["rating_nm"], units, 0)))
            (kv("twist at the rating", num_text(&bar["twist_at_rating_deg"], 2, "°")))
            (kv("largest shear stress at the rating", num_text(&bar["shear_stress_at_rating_mpa"], 0, "MPa")
                .map(|s| match bar["shear_stress_at_rating_section"].as_str() {
                    Some(sec) => format!("{s} ({sec})"),
                    None => s,
                })))
            (kv("stress over shear yield at the rating", bar["stress_ratio_at_rating"].as_f64()
                .map(|x| format!("{} %", fixed(Some(100.0 * x), 0)))))
            (kv("drive-end natural frequency", num_text(&bar["natural_frequency_hz"], 0, "Hz")))
            (kv("spring-back time (model)", num_text(&bar["springback_ms"], 2, "ms")))
        }
        @if let Some(secs) = sections {
            table {
                tr {
                    th { "section" } th.text { "shape" } th { "length (mm)" }
                    th { "G (GPa)" } th.text { "G from" } th { "share of compliance" }
                }
                @for s in secs {
                    tr {
                        td { (s["index"].as_u64().map(|i| i.to_string()).unwrap_or_default()) }
                        td.text { (s["shape"].as_str().unwrap_or("")) }
                        td { (fixed(s["length_mm"].as_f64(), 1)) }
                        td { (fixed(s["shear_modulus_gpa"].as_f64(), 1)) }
                        td.text { (s["shear_modulus_from"].as_str().unwrap_or("")) }
                        td { (fixed(s["compliance_share"].as_f64().map(|x| 100.0 * x), 1)) " %" }
                    }
                }
            }
        }
    }
}

/// The results in a few lines: blows and rate, rotations, peak and holding torque.
fn summary_block(r: &Value, units: TorqueUnit) -> Markup {
    let s = &r["summary"];
    let rate = match (
        s["blow_rate_per_min"].as_f64(),
        s["blow_rate_spread_per_min"].as_f64(),
    ) {
        (Some(b), Some(sd)) => Some(format!(
            "{} blows/min (spread {})",
            fixed(Some(b), 0),
            fixed(Some(sd), 0)
        )),
        (Some(b), None) => Some(format!("{} blows/min", fixed(Some(b), 0))),
        _ => None,
    };
    let ci = |key: &str| {
        interval(&s[key], 1, |x| units.of_nm(x))
            .map(|t| format!(" (95 % interval {t} {})", units.label()))
    };
    let stopped = match (
        s["nut_stopped_after_blow"].as_u64(),
        s["blow_count"].as_u64(),
    ) {
        (Some(k), _) => Some(format!("after blow {k}")),
        (None, Some(n)) if n > 0 && s["nut_advancing_blow_count"].as_u64() == Some(0) => {
            Some("the nut never advanced".into())
        }
        (None, Some(n)) if n > 0 => Some("still advancing on the last blow".into()),
        _ => None,
    };
    html! {
        table.kv {
            tr { th { "blows" } td data-key="blow_count" data-value=(json_text(&s["blow_count"])) {
                (s["blow_count"].as_u64().unwrap_or(0)) } }
            (kv("blow rate", rate))
            (kv("drive end turned", num_text(&s["drive_total_deg"], 2, "°")))
            (kv("nut end turned", num_text(&s["nut_total_deg"], 2, "°")))
            (kv("nut stopped advancing", stopped))
            (kv("holding torque (model)", torque_text(&s["holding_torque_nm"], units, 1)
                .map(|t| t + &ci("holding_torque_ci95_nm").unwrap_or_default())))
            (kv("highest peak torque (model)", torque_text(&s["peak_torque_nm"], units, 1).map(|t| {
                match s["peak_torque_to_rating_ratio"].as_f64() {
                    Some(q) => format!("{t}, {} % of the rating", fixed(Some(100.0 * q), 0)),
                    None => t,
                }
            })))
            (kv("highest while the nut still turned", torque_text(&s["peak_torque_nut_advancing_nm"], units, 1)))
            (kv("twist left at the end", num_text(&s["residual_twist_end_deg"], 2, "°")))
            (kv("angle noise (1 frame, σ)", match (s["drive_noise_deg"].as_f64(), s["nut_noise_deg"].as_f64()) {
                (Some(d), Some(n)) => Some(format!("drive {}°, nut {}°", fixed(Some(d), 3), fixed(Some(n), 3))),
                _ => None,
            }))
            (kv("tracking uncertainty (validated, σ)", s["twist_tracking_sigma_deg"].as_f64().filter(|&u| u > 0.0).map(|u| {
                format!("{}° on every twist reading, in every interval: the tracker's errors on rendered footage of this kind (lossless or lossy, camera still or moved), which the noise above does not show", fixed(Some(u), 2))
            })))
        }
    }
}

/// The per-blow table, with interval columns when the report carries them.
fn blow_table(r: &Value, units: TorqueUnit) -> Markup {
    let blows: &[Value] = r["blows"].as_array().map_or(&[], Vec::as_slice);
    let has_ci = blows.iter().any(|b| b["peak_torque_ci95_nm"].is_array());
    html! {
        @if blows.is_empty() {
            p { "No blows were found in the analysed window." }
        } @else {
            table.blows {
                thead {
                    tr {
                        th { "blow" }
                        @for c in &COLUMNS {
                            th { (c.head) br; (c.unit.unwrap_or(units.label())) }
                            @if c.key == "peak_torque_nm" && has_ci {
                                th { "peak torque 95 % interval" br; (units.label()) }
                            }
                        }
                        th.text { "nut advanced" }
                    }
                }
                tbody {
                    @for b in blows {
                        @let idx = json_text(&b["index"]);
                        @let advanced = b["nut_advanced"].as_bool();
                        tr class=[(advanced == Some(false)).then_some("stalled")] {
                            td data-blow=(idx) data-key="index" data-value=(idx) { (idx) }
                            @for c in &COLUMNS {
                                (num_cell(&b[c.key], c.key, &idx, c.decimals, units))
                                @if c.key == "peak_torque_nm" && has_ci {
                                    td data-blow=(idx) data-key="peak_torque_ci95_nm"
                                        data-value=(json_text(&b["peak_torque_ci95_nm"])) {
                                        (interval(&b["peak_torque_ci95_nm"], 1, |x| units.of_nm(x)).unwrap_or("–".into()))
                                    }
                                }
                            }
                            td.text data-blow=(idx) data-key="nut_advanced" data-value=(json_text(&b["nut_advanced"])) {
                                @match advanced { Some(true) => "yes", Some(false) => "no", None => "–" }
                            }
                        }
                    }
                }
            }
            p.meta {
                "Shaded rows: blows in which the nut advanced less than "
                (fixed(r["summary"]["nut_stop_threshold_deg"].as_f64(), 2)) "°. "
                "Advances run from just before a blow to just before the next; residual twist is the wind-up left when the next blow lands. "
                "Torque = bar stiffness × twist."
            }
        }
    }
}

/// The whole `report.html` for one analysis, built from its `report.json` document.
///
/// `plots` are (title, SVG document) pairs; `thumbnail` is a `data:` URI or why there is none.
pub(crate) fn report_page(
    a: &Analysis,
    report: &Report,
    plots: &[(&str, String)],
    thumbnail: Result<String, String>,
    opts: &ReportOptions,
) -> String {
    let r = serde_json::to_value(report).unwrap_or(Value::Null);
    let units = opts.units;
    let name = a
        .clip
        .path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| a.clip.path.display().to_string());
    let warnings: Vec<&str> = r["warnings"]
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(Value::as_str)
        .collect();
    let w = &r["window"];
    let body = html! {
        h1 { "Impact blows on a torsion bar: " (name) }
        p.meta {
            "Written by " (report.tool.name) " " (report.tool.version) " on " (report.created_utc)
            ". Torques are in " (units.label()) "; files keep SI keys (report.json, blows.csv)."
        }
        (caution())
        h2 { "Clip" }
        table.kv {
            tr { th { "file" } td { code { (report.clip.path) } } }
            (kv("size", report.clip.bytes.map(|b| format!("{b} bytes"))))
            tr { th { "SHA-256" } td { code { (report.clip.sha256.as_deref().unwrap_or("– (the clip could not be read again)")) } } }
            (kv("frames", Some(format!("{} in the clip, {} analysed ({} × {} px, {})",
                a.clip.frames, report.frames, a.clip.width, a.clip.height, a.clip.codec))))
            (kv("analysed window", match (w["first_frame"].as_u64(), w["last_frame"].as_u64()) {
                (Some(f), Some(l)) => Some(format!("frames {f} to {l} ({} s to {} s)",
                    fixed(w["start_s"].as_f64(), 4), fixed(w["end_s"].as_f64(), 4))),
                _ => None,
            }))
            (kv("capture rate", Some(format!("{} frames/s, from {}", super::display::tick(report.fps),
                match report.fps_source.as_str() {
                    "option" => "--fps",
                    "rig" => "the rig's capture_fps_hz",
                    _ => "the container (probably the playback rate: check it)",
                }))))
        }
        figure {
            @match &thumbnail {
                Ok(uri) => {
                    img src=(uri) alt="First analysed frame with each mark's pivot, annulus, detected stripe and angle drawn";
                    figcaption { "First analysed frame (frame " (w["first_frame"].as_u64().unwrap_or(0)) ") with the marks as tracked: pivot, annulus, detected stripe and angle." }
                }
                Err(why) => { p.meta { "No frame thumbnail: " (why) "." } }
            }
        }
        h2 { "Rig" }
        @if let Some(fps) = r["rig"]["capture_fps_hz"].as_f64() {
            p { "Capture rate in the rig: " (super::display::tick(fps)) " frames/s." }
        }
        (marks_table(&r["rig"]))
        h2 { "Bar and stiffness" }
        (bar_block(&r, units))
        h2 { "Results" }
        (summary_block(&r, units))
        @if let Some(sentence) = r["springback"]["sentence"].as_str() {
            p.verdict { strong { "Spring-back: " } (sentence) }
        }
        h2 { "Per blow" }
        (blow_table(&r, units))
        h2 { "Plots" }
        @for (title, svg) in plots {
            figure {
                (PreEscaped(inline_svg(svg)))
                figcaption { (title) }
            }
        }
        h2 { "Warnings" }
        @if warnings.is_empty() {
            p { "None." }
        } @else {
            ul.warnings { @for w in &warnings { li { (w) } } }
        }
        (caution())
        footer {
            "report.json, blows.csv and trace.csv beside this page hold every number at full precision. "
            "Conventions: angles are positive in the tightening direction and zero at the first analysed frame; "
            "twist = drive − nut; time = frame index / capture rate."
        }
    };
    page(&format!("twistmark report: {name}"), body).into_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn svg_loses_its_xml_declaration_and_gains_a_view_box() {
        let s =
            inline_svg(r#"<?xml version="1.0"?><svg width="1200" height="650" xmlns="x"></svg>"#);
        assert!(s.starts_with("<svg viewBox=\"0 0 1200 650\" width="), "{s}");
        let kept = inline_svg(r#"<svg viewBox="0 0 1 1"></svg>"#);
        assert_eq!(kept, r#"<svg viewBox="0 0 1 1"></svg>"#);
    }

    #[test]
    fn exact_values_are_written_as_report_json_writes_them() {
        assert_eq!(
            json_text(&serde_json::json!(12.345678901234)),
            "12.345678901234"
        );
        assert_eq!(json_text(&Value::Null), "null");
    }
}

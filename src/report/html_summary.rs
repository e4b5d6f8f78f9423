//! Stage 5, report: `summary.html`, the page a lab files for a batch (interface v2, "Reports
//! to read and file").
//!
//! In: the batch's summary rows as JSON objects (the rows of `summary.json`, so a field other
//! stages add, such as `holding_torque_nm`, shows as soon as it exists), the manifest's tag
//! names, and the comparison plot as SVG. Out: one self-contained HTML file (inline CSS and
//! SVG, no scripts or fetched fonts) that opens offline and prints on A4. Each analysed clip
//! links to its own `report.html`. With tags, the clips are also grouped by their tag values,
//! with each group's median blow rate and peak torque.
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use maud::{Markup, PreEscaped, html};
use serde_json::Value;

use super::display::{ReportOptions, TorqueUnit, fixed};
use super::html::{caution, inline_svg, json_text, page};

/// One number cell: rounded text, the exact `summary.json` value in `data-value`.
fn cell(row: &Value, key: &str, decimals: usize, units: TorqueUnit) -> Markup {
    let v = &row[key];
    let x = v.as_f64();
    let shown = if key.ends_with("_nm") {
        x.map(|x| units.of_nm(x))
    } else {
        x
    };
    html! {
        td data-clip=(row["clip"].as_str().unwrap_or("")) data-key=(key) data-value=(json_text(v)) {
            (fixed(shown, decimals))
        }
    }
}

/// The tag value of a row, or empty.
fn tag<'a>(row: &'a Value, name: &str) -> &'a str {
    row["tags"][name].as_str().unwrap_or("")
}

/// Plain words for the measured spring-back verdict.
fn verdict_words(v: &Value) -> &'static str {
    match v.as_str() {
        Some("sprang_back") => "sprang back",
        Some("partial") => "partly wound",
        Some("still_wound") => "still wound up",
        _ => "–",
    }
}

/// The table of every clip, in folder order.
fn clips_table(rows: &[Value], tags: &[String], units: TorqueUnit) -> Markup {
    let u = units.label();
    html! {
        table.clips {
            thead {
                tr {
                    th.text { "clip" }
                    @for t in tags { th.text { (t) } }
                    th { "blows" }
                    th { "blow rate" br; "/min" }
                    th { "rate spread" br; "/min" }
                    th { "peak torque" br; (u) }
                    th { "holding torque" br; (u) }
                    th { "last advancing blow" br; (u) }
                    th { "rating" br; (u) }
                    th { "stiffness" br; (u) "/°" }
                    th.text { "stiffness source" }
                    th { "residual twist" br; "°" }
                    th.text { "spring-back" }
                    th { "warnings" }
                }
            }
            tbody {
                @for r in rows {
                    @let name = r["clip"].as_str().unwrap_or("");
                    @if r["status"].as_str() == Some("ok") {
                        tr {
                            td.text { a href=(format!("{}/report.html", name)) { (name) } }
                            @for t in tags { td.text { (tag(r, t)) } }
                            td data-clip=(name) data-key="blow_count" data-value=(json_text(&r["blow_count"])) {
                                (r["blow_count"].as_u64().map(|n| n.to_string()).unwrap_or("–".into()))
                            }
                            (cell(r, "blow_rate_per_min", 0, units))
                            (cell(r, "blow_rate_spread_per_min", 0, units))
                            (cell(r, "peak_torque_nm", 1, units))
                            (cell(r, "holding_torque_nm", 1, units))
                            (cell(r, "last_advancing_torque_nm", 1, units))
                            (cell(r, "rating_nm", 0, units))
                            td data-clip=(name) data-key="bar_stiffness_nm_per_deg"
                                data-value=(json_text(&r["bar_stiffness_nm_per_deg"])) {
                                (fixed(r["bar_stiffness_nm_per_deg"].as_f64().map(|k| units.of_nm(k)), 3))
                            }
                            td.text { (r["stiffness_source"].as_str().unwrap_or("–")) }
                            (cell(r, "residual_twist_deg", 2, units))
                            td.text { (verdict_words(&r["springback_verdict"])) }
                            td { (r["warning_count"].as_u64().unwrap_or(0)) }
                        }
                    } @else {
                        tr.failed {
                            td.text { (name) }
                            @for t in tags { td.text { (tag(r, t)) } }
                            td.text colspan="12" {
                                strong { "failed: " } (r["error"].as_str().unwrap_or("unknown error"))
                            }
                        }
                    }
                }
            }
        }
    }
}

/// Clips grouped by their tag values: count, median rate and peak torque per group.
fn groups_table(rows: &[Value], tags: &[String], units: TorqueUnit) -> Markup {
    let mut groups: Vec<(Vec<String>, Vec<&Value>)> = Vec::new();
    for r in rows.iter().filter(|r| r["status"].as_str() == Some("ok")) {
        let key: Vec<String> = tags.iter().map(|t| tag(r, t).to_string()).collect();
        match groups.iter_mut().find(|g| g.0 == key) {
            Some(g) => g.1.push(r),
            None => groups.push((key, vec![r])),
        }
    }
    let med = |g: &[&Value], k: &str| {
        let v: Vec<f64> = g.iter().filter_map(|r| r[k].as_f64()).collect();
        crate::stats::median(&v)
    };
    html! {
        table.groups {
            thead {
                tr {
                    @for t in tags { th.text { (t) } }
                    th { "clips" }
                    th { "median blow rate" br; "/min" }
                    th { "median peak torque" br; (units.label()) }
                    th { "highest peak torque" br; (units.label()) }
                    th { "median residual twist" br; "°" }
                    th.text { "clips" }
                }
            }
            tbody {
                @for (key, g) in &groups {
                    tr {
                        @for v in key { td.text { (v) } }
                        td { (g.len()) }
                        td { (fixed(med(g, "blow_rate_per_min"), 0)) }
                        td { (fixed(med(g, "peak_torque_nm").map(|x| units.of_nm(x)), 1)) }
                        td { (fixed(g.iter().filter_map(|r| r["peak_torque_nm"].as_f64()).reduce(f64::max).map(|x| units.of_nm(x)), 1)) }
                        td { (fixed(med(g, "residual_twist_deg"), 2)) }
                        td.text { (g.iter().filter_map(|r| r["clip"].as_str()).collect::<Vec<_>>().join(", ")) }
                    }
                }
            }
        }
    }
}

/// The whole `summary.html`.
pub(crate) fn summary_page(
    rows: &[Value],
    tags: &[String],
    comparison_svg: Option<&str>,
    opts: &ReportOptions,
) -> String {
    let units = opts.units;
    let ok = rows
        .iter()
        .filter(|r| r["status"].as_str() == Some("ok"))
        .count();
    let body = html! {
        h1 { "Impact blows on torsion bars: batch of " (rows.len()) " clip(s)" }
        p.meta {
            "Written by twistmark " (env!("CARGO_PKG_VERSION")) " on " (super::provenance::now_utc())
            ". " (ok) " analysed, " (rows.len() - ok) " failed. Torques are in " (units.label())
            "; summary.csv and summary.json keep SI keys."
        }
        (caution())
        @if !tags.is_empty() {
            h2 { "By " (tags.join(", ")) }
            (groups_table(rows, tags, units))
        }
        h2 { "Clips" }
        (clips_table(rows, tags, units))
        p.meta {
            "Spring-back: the measured residual twist over the peak twist when the next blow lands "
            "(sprang back ≤ 25 %, still wound up > 40 %); a bar that stays wound up does not limit torque. "
            "Each clip name opens that clip's own report."
        }
        @if let Some(svg) = comparison_svg {
            h2 { "Comparison" }
            figure {
                (PreEscaped(inline_svg(svg)))
                figcaption { "Peak torque against blow rate, per clip and against the rating; nut advance per blow." }
            }
        }
        (caution())
    };
    page("twistmark batch summary", body).into_string()
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn rows() -> Vec<Value> {
        vec![
            json!({"clip": "a", "status": "ok", "blow_count": 10, "blow_rate_per_min": 3000.0,
                   "peak_torque_nm": 135.5818, "residual_twist_deg": 2.0,
                   "springback_verdict": "still_wound", "tags": {"tool": "T1", "bar": "B<1>"}}),
            json!({"clip": "b", "status": "failed", "error": "b.mp4: cannot <decode>",
                   "tags": {"tool": "T2", "bar": "B1"}}),
            json!({"clip": "c", "status": "ok", "blow_count": 8, "blow_rate_per_min": 1000.0,
                   "peak_torque_nm": 100.0, "tags": {"tool": "T1", "bar": "B<1>"}}),
        ]
    }

    #[test]
    fn a_page_groups_by_tags_escapes_text_and_keeps_exact_values() {
        let tags = vec!["tool".to_string(), "bar".to_string()];
        let p = summary_page(&rows(), &tags, None, &ReportOptions::default());
        assert!(
            p.contains("B&lt;1&gt;") && !p.contains("B<1>"),
            "tag text is escaped"
        );
        assert!(p.contains("cannot &lt;decode&gt;"));
        assert!(p.contains(r#"data-clip="a" data-key="peak_torque_nm" data-value="135.5818""#));
        assert!(p.contains(r#"href="a/report.html""#));
        // Group T1/B<1> holds a and c: median rate 2000.
        assert!(p.contains("<td>2000</td>"), "{p}");
        assert!(!p.contains("<script"));
    }

    #[test]
    fn lbf_ft_shows_converted_and_keeps_si_in_data() {
        let opts = ReportOptions {
            units: TorqueUnit::LbfFt,
        };
        let p = summary_page(&rows(), &[], None, &opts);
        assert!(p.contains(r#"data-value="135.5818">100.0</td>"#), "{p}");
        assert!(p.contains("lbf·ft"));
    }
}

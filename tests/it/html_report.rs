//! `report.html` and `summary.html` in a real browser: the binary analyses the demo clip (a
//! scene of the project's invented bench, rendered with known truth) and a small batch, and
//! headless Chromium renders each page offline. Checks: the screenshot is not blank, and the
//! rendered DOM holds every number of the blow table exactly as `report.json` has it (in
//! `data-value`) and shows it rounded as the page states. Also: nothing is fetched (no
//! scripts, no external sources), and `--units lbf-ft` changes what people read but not the
//! SI keys of the files.
//!
//! Chromium comes from Debian's `chromium` package, which `tools/setup.sh --browser`
//! installs (tools/test.sh does so). Set `TWISTMARK_CHROMIUM` to use another binary.
#![cfg(feature = "ffmpeg")]

use std::path::{Path, PathBuf};
use std::process::{Command as Process, Stdio};
use std::time::{Duration, Instant};

use assert_cmd::Command;
use serde_json::Value;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn twistmark() -> Command {
    Command::cargo_bin("twistmark").unwrap()
}

/// The Chromium binary, or a failure saying how to install it.
fn chromium() -> PathBuf {
    if let Some(p) = std::env::var_os("TWISTMARK_CHROMIUM") {
        return PathBuf::from(p);
    }
    for name in ["chromium", "chromium-browser", "google-chrome"] {
        for dir in std::env::split_paths(&std::env::var_os("PATH").unwrap_or_default()) {
            let p = dir.join(name);
            if p.is_file() {
                return p;
            }
        }
    }
    panic!(
        "headless Chromium is needed to check report.html in a browser: run `tools/setup.sh --browser` \
         (Debian's chromium package) or set TWISTMARK_CHROMIUM"
    );
}

/// Runs headless Chromium on `page` with `args`, bounded to 120 s; returns stdout.
fn run_chromium(page: &Path, args: &[String], profile: &Path) -> String {
    let url = format!("file://{}", page.canonicalize().unwrap().display());
    let mut child = Process::new(chromium())
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--no-first-run",
            "--disable-extensions",
            "--hide-scrollbars",
            // No network at all: a page that needed to fetch something would show it.
            "--proxy-server=127.0.0.1:9",
            "--proxy-bypass-list=<-loopback>",
        ])
        .arg(format!("--user-data-dir={}", profile.display()))
        .args(args)
        .arg(&url)
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .expect("start chromium");
    let mut out = child.stdout.take().unwrap();
    let reader = std::thread::spawn(move || {
        let mut s = String::new();
        std::io::Read::read_to_string(&mut out, &mut s).ok();
        s
    });
    let start = Instant::now();
    loop {
        if let Some(status) = child.try_wait().unwrap() {
            assert!(status.success(), "chromium failed on {url}: {status}");
            break;
        }
        if start.elapsed() > Duration::from_secs(120) {
            let _ = child.kill();
            panic!("chromium did not finish rendering {url} within 120 s");
        }
        std::thread::sleep(Duration::from_millis(100));
    }
    reader.join().unwrap()
}

/// Renders `page` to a 1200 × 1600 screenshot and checks it is not blank: many pixels that are
/// not the white background, some dark (text) and some coloured (plots, thumbnail, caution).
fn assert_renders_non_blank(page: &Path, work: &Path) {
    let shot = work.join(format!(
        "{}.png",
        page.file_stem().unwrap().to_string_lossy()
    ));
    run_chromium(
        page,
        &[
            format!("--screenshot={}", shot.display()),
            "--window-size=1200,1600".into(),
        ],
        &work.join("profile-shot"),
    );
    let img = image::open(&shot).expect("screenshot written").to_rgb8();
    assert_eq!((img.width(), img.height()), (1200, 1600));
    let n = img.pixels().count();
    let not_white = img
        .pixels()
        .filter(|p| p.0.iter().any(|&c| c < 235))
        .count();
    let dark = img.pixels().filter(|p| p.0.iter().all(|&c| c < 90)).count();
    let coloured = img
        .pixels()
        .filter(|p| {
            let (mx, mn) = (*p.0.iter().max().unwrap(), *p.0.iter().min().unwrap());
            mx - mn > 60
        })
        .count();
    assert!(
        not_white > n / 50 && dark > 2_000 && coloured > 500,
        "{} looks blank: {not_white} non-white, {dark} dark, {coloured} coloured of {n} pixels",
        page.display()
    );
}

/// The DOM after Chromium has parsed and laid out the page.
fn dump_dom(page: &Path, work: &Path) -> String {
    let dom = run_chromium(page, &["--dump-dom".into()], &work.join("profile-dom"));
    assert!(dom.contains("</html>"), "no DOM from chromium");
    dom
}

/// The text of a value as serialised (for values that survive parsing exactly: integers,
/// booleans, null).
fn json_text(v: &Value) -> String {
    serde_json::to_string(v).unwrap()
}

/// Each blow's raw text in `report.json`, in order: the exact characters written, since
/// parsing a float and printing it again can move its last digit.
fn raw_blows(text: &str) -> Vec<&str> {
    let start = text.find("\"blows\": [").expect("report.json has blows");
    let end = text[start..]
        .find("\n  ],")
        .or_else(|| text[start..].find("\n  ]"))
        .map_or(text.len(), |e| start + e);
    text[start..end].split("\"index\": ").skip(1).collect()
}

/// The raw text of `key`'s value in one blow's text.
fn raw_value<'a>(blow: &'a str, key: &str) -> &'a str {
    let pat = format!("\"{key}\": ");
    let at = blow.find(&pat).unwrap_or_else(|| panic!("{key} missing")) + pat.len();
    let rest = &blow[at..];
    let end = rest.find([',', '\n']).unwrap_or(rest.len());
    rest[..end].trim()
}

/// A value rounded as the page shows it, in N·m for torques (the default unit).
fn shown(v: &Value, decimals: usize) -> String {
    match v.as_f64() {
        Some(x) => {
            let s = format!("{x:.decimals$}");
            if s.trim_start_matches('-')
                .chars()
                .all(|c| c == '0' || c == '.')
            {
                s.trim_start_matches('-').to_string()
            } else {
                s
            }
        }
        None => "–".to_string(),
    }
}

/// The blow-table columns of report.html and the decimals each shows.
const COLUMNS: [(&str, usize); 9] = [
    ("t_s", 4),
    ("drive_advance_deg", 2),
    ("nut_advance_deg", 2),
    ("peak_twist_deg", 2),
    ("peak_torque_nm", 1),
    ("residual_twist_deg", 2),
    ("residual_torque_nm", 1),
    ("breakaway_torque_nm", 1),
    ("nut_lag_ms", 2),
];

/// Nothing on the page is fetched: no scripts, no external sources, styles or fonts.
fn assert_self_contained(html: &str) {
    let lower = html.to_ascii_lowercase();
    for bad in [
        "<script",
        "src=\"http",
        "href=\"http",
        "url(http",
        "url(\"http",
        "@import",
        "@font-face",
        "<link",
        "<iframe",
    ] {
        assert!(!lower.contains(bad), "page is not self-contained: {bad}");
    }
}

#[test]
fn report_html_renders_offline_and_its_table_matches_report_json() {
    let work = tempfile::tempdir().unwrap();
    let out = work.path().join("o");
    twistmark()
        .current_dir(root())
        .args([
            "analyze",
            "fixtures/demo/clip_h264.mp4",
            "--rig",
            "fixtures/demo/rig.json",
            "--out",
        ])
        .arg(&out)
        .assert()
        .success();
    let page = out.join("report.html");
    let html = std::fs::read_to_string(&page).unwrap();
    assert_self_contained(&html);
    assert!(html.contains("data:image/png;base64,"), "frame thumbnail");
    assert!(html.matches("<svg").count() >= 3, "inline plots");
    assert!(html.contains("@page") && html.contains("A4"), "print style");

    let text = std::fs::read_to_string(out.join("report.json")).unwrap();
    let report: Value = serde_json::from_str(&text).unwrap();
    let blows = report["blows"].as_array().unwrap();
    assert!(blows.len() >= 5, "the demo clip has blows");
    let raw = raw_blows(&text);
    assert_eq!(raw.len(), blows.len());

    assert_renders_non_blank(&page, work.path());
    let dom = dump_dom(&page, work.path());
    for (b, raw) in blows.iter().zip(&raw) {
        let i = json_text(&b["index"]);
        for (key, d) in COLUMNS {
            let cell = format!(
                "data-blow=\"{i}\" data-key=\"{key}\" data-value=\"{}\">{}</td>",
                raw_value(raw, key),
                shown(&b[key], d)
            );
            assert!(dom.contains(&cell), "blow {i}: the DOM lacks {cell}");
        }
        let adv = if b["nut_advanced"] == Value::Bool(true) {
            "yes"
        } else {
            "no"
        };
        assert!(dom.contains(&format!(
            "data-blow=\"{i}\" data-key=\"nut_advanced\" data-value=\"{}\">{adv}</td>",
            json_text(&b["nut_advanced"])
        )));
    }
    // What a lab files with the table.
    for must in [
        "clip_h264.mp4",
        report["clip"]["sha256"].as_str().unwrap(),
        "Bar and stiffness",
        "stiffness source",
        "computed from the sections",
        "Spring-back:",
        "Warnings",
        "not a calibrated measurement",
        "calibrated torque wrench",
    ] {
        assert!(dom.contains(must), "the page lacks {must}");
    }
}

#[test]
fn summary_html_renders_offline_with_a_row_per_clip() {
    let work = tempfile::tempdir().unwrap();
    let inp = work.path().join("in");
    std::fs::create_dir(&inp).unwrap();
    for (name, src) in [
        ("demo", "fixtures/demo"),
        ("noisy", "fixtures/fast-tool-noisy"),
    ] {
        std::fs::copy(
            root().join(src).join("clip_h264.mp4"),
            inp.join(format!("{name}.mp4")),
        )
        .unwrap();
        std::fs::copy(
            root().join(src).join("rig.json"),
            inp.join(format!("{name}.rig.json")),
        )
        .unwrap();
    }
    let out = work.path().join("out");
    twistmark()
        .args(["batch"])
        .arg(&inp)
        .arg("--rig")
        .arg(root().join("fixtures/demo/rig.json"))
        .arg("--out")
        .arg(&out)
        .args(["--jobs", "1"])
        .assert()
        .success();
    let page = out.join("summary.html");
    let html = std::fs::read_to_string(&page).unwrap();
    assert_self_contained(&html);
    let summary_text = std::fs::read_to_string(out.join("summary.json")).unwrap();
    let summary: Value = serde_json::from_str(&summary_text).unwrap();
    assert_renders_non_blank(&page, work.path());
    let dom = dump_dom(&page, work.path());
    for row in summary["clips"].as_array().unwrap() {
        let clip = row["clip"].as_str().unwrap();
        assert!(
            dom.contains(&format!("href=\"{clip}/report.html\"")),
            "{clip} link"
        );
        let at = summary_text.find(&format!("\"clip\": \"{clip}\"")).unwrap();
        let raw_row = &summary_text[at..];
        for key in ["peak_torque_nm", "blow_rate_per_min", "residual_twist_deg"] {
            let attrs = format!(
                "data-clip=\"{clip}\" data-key=\"{key}\" data-value=\"{}\"",
                raw_value(raw_row, key)
            );
            assert!(dom.contains(&attrs), "{clip}: the DOM lacks {attrs}");
        }
        // Each clip's own page exists beside the summary.
        assert!(out.join(clip).join("report.html").is_file());
    }
    assert!(dom.contains("Peak and holding torque against blow rate") || html.contains("<svg"));
}

#[test]
fn units_lbf_ft_change_what_people_read_not_the_file_keys() {
    let work = tempfile::tempdir().unwrap();
    let out = work.path().join("o");
    let run = twistmark()
        .current_dir(root())
        .args([
            "analyze",
            "fixtures/demo/clip_h264.mp4",
            "--rig",
            "fixtures/demo/rig.json",
            "--units",
            "lbf-ft",
            "--out",
        ])
        .arg(&out)
        .assert()
        .success();
    let table = String::from_utf8(run.get_output().stdout.clone()).unwrap();
    let header = table.lines().nth(1).unwrap();
    assert!(header.find("lbf·ft") < header.find("N·m"), "{header}");
    let text = std::fs::read_to_string(out.join("report.json")).unwrap();
    let report: Value = serde_json::from_str(&text).unwrap();
    let b = &report["blows"][0];
    let nm = b["peak_torque_nm"].as_f64().unwrap();
    let exact = raw_value(raw_blows(&text)[0], "peak_torque_nm");
    // The page shows lbf·ft (1 lbf·ft = 1.355818 N·m, NIST Special Publication 811, 2008,
    // Appendix B.9) and keeps N·m in data-value.
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    let cell = format!(
        "data-blow=\"1\" data-key=\"peak_torque_nm\" data-value=\"{exact}\">{:.1}</td>",
        nm / 1.355_818
    );
    assert!(html.contains(&cell), "lacks {cell}");
    assert!(html.contains("lbf·ft"));
    let csv = std::fs::read_to_string(out.join("blows.csv")).unwrap();
    let head = csv.lines().next().unwrap();
    assert!(head.contains("peak_torque_nm") && head.contains("peak_torque_lbf_ft"));
    let svg = std::fs::read_to_string(out.join("twist_torque.svg")).unwrap();
    assert!(
        svg.contains("torque (lbf·ft, model)"),
        "plot axis in lbf·ft"
    );
}

/// Every clip under `dir` as `batch` should find it: video files, and folders of stills.
fn clips_under(dir: &Path, out: &mut Vec<PathBuf>) {
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            let stills = std::fs::read_dir(&p).unwrap().any(|f| {
                f.unwrap()
                    .path()
                    .extension()
                    .is_some_and(|x| x == "png" || x == "tif")
            });
            if stills {
                out.push(p);
            } else {
                clips_under(&p, out);
            }
        } else if p
            .extension()
            .is_some_and(|x| ["mp4", "mkv", "avi"].contains(&x.to_str().unwrap_or("")))
        {
            out.push(p);
        }
    }
}

#[test]
fn batch_over_fixtures_finds_every_clip_and_groups_by_manifest_tags() {
    // fixtures/ as laid out: one folder per scene with its rig.json inside, no --rig.
    let mut want = Vec::new();
    clips_under(&root().join("fixtures"), &mut want);
    assert!(want.len() >= 10, "{want:?}");
    let work = tempfile::tempdir().unwrap();
    // Tags by scene speed; absolute clip paths are allowed in a manifest.
    let mut manifest = String::from("clip,tool,codec\n");
    for p in &want {
        let scene = p
            .strip_prefix(root().join("fixtures"))
            .unwrap()
            .components()
            .next()
            .unwrap()
            .as_os_str()
            .to_string_lossy()
            .into_owned();
        let tool = if scene.starts_with("slow") {
            "slow"
        } else {
            "fast"
        };
        let codec = p
            .extension()
            .map_or("stills".into(), |x| x.to_string_lossy().into_owned());
        manifest.push_str(&format!("{},{tool},{codec}\n", p.display()));
    }
    let mpath = work.path().join("manifest.csv");
    std::fs::write(&mpath, manifest).unwrap();
    let out = work.path().join("out");
    twistmark()
        .arg("batch")
        .arg(root().join("fixtures"))
        .arg("--manifest")
        .arg(&mpath)
        .arg("--out")
        .arg(&out)
        .assert()
        .success();
    let summary: Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let rows = summary["clips"].as_array().unwrap();
    assert_eq!(rows.len(), want.len(), "every clip found once");
    assert!(rows.iter().all(|r| r["status"] == "ok"), "{rows:?}");
    assert!(rows.iter().all(|r| r["tags"]["tool"].is_string()));
    let csv = std::fs::read_to_string(out.join("summary.csv")).unwrap();
    assert!(csv.starts_with("clip,tool,codec,status,"), "{csv}");
    for col in [
        "springback_verdict",
        "blow_rate_spread_per_min",
        "stiffness_source",
    ] {
        assert!(
            csv.lines().next().unwrap().contains(col),
            "summary.csv lacks {col}"
        );
    }
    let html = std::fs::read_to_string(out.join("summary.html")).unwrap();
    assert_self_contained(&html);
    assert!(
        html.contains("By tool, codec"),
        "grouped by the manifest's tags"
    );
    assert!(html.contains("<td class=\"text\">slow</td>"));
    // Each clip's page is in its own folder, named after its folder below fixtures/.
    assert!(out.join("fast-tool/clip_h264/report.html").is_file());
    assert!(out.join("slow-tool/frames/report.html").is_file());
}

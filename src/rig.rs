//! The rig file: where each mark is on screen, which way is tightening, the capture rate and
//! the bar. Parsed from JSON with unknown fields rejected by name, then validated so that every
//! rejection names its field and says what to change.
//!
//! Pixel convention (stated once for the whole crate): x to the right, y down, origin at the
//! centre of the top-left pixel. Screen angles run from +x towards +y, i.e. clockwise on screen.
//!
//! Read by every command: it must never import decode, track, segment, report, `analyze`,
//! `batch`, `find_marks` or the CLI.

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::mechanics::BarSpec;

/// The only rig file version this build reads.
pub const RIG_VERSION: u32 = 1;

/// A parsed and validated rig file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Rig {
    /// Always 1.
    pub rig_version: u32,
    /// The camera's capture rate, used when `--fps` is not given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub capture_fps_hz: Option<f64>,
    /// The marks by role.
    pub marks: Marks,
    /// The torsion bar; without it, torque is not computed.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub bar: Option<BarSpec>,
    /// What the camera does to the picture that the tracker must undo (a rolling shutter).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub camera: Option<CameraSpec>,
}

/// The rig's `camera`: properties of the camera that filmed the clip.
#[derive(Debug, Clone, Copy, PartialEq, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CameraSpec {
    /// Time the sensor takes to read a frame out from its top row to its bottom row, ms
    /// (a rolling shutter; 0 or absent for a global shutter). See docs/conventions.md, "Time".
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rolling_shutter_ms: Option<f64>,
}

/// Longest readout accepted, ms: a second per frame is no video camera's readout.
pub const MAX_ROLLING_SHUTTER_MS: f64 = 1000.0;

/// The marks of a rig, by role.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Marks {
    /// The mark at the bar's drive end (at the wrench's anvil).
    pub drive: Mark,
    /// The mark at the bar's nut end (at the socket, or on the nut).
    pub nut: Mark,
    /// An optional mark on something that does not turn, used to cancel camera shake.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fixed: Option<Mark>,
}

/// One painted mark and how to measure it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "lowercase", deny_unknown_fields)]
pub enum Mark {
    /// A stripe crossing an annulus around a pivot, roughly along a radius.
    Radial(RadialMark),
    /// A stripe painted along the bar and seen from the side.
    Side(SideMark),
}

/// A radial mark: a stripe crossing the annulus `radius[0]..radius[1]` around `pivot`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RadialMark {
    /// Centre of rotation on screen, in pixels.
    pub pivot: [f64; 2],
    /// Inner and outer radius of the annulus searched for paint, in pixels (along the major
    /// axis when `ellipse` is given).
    pub radius: [f64; 2],
    /// Tightening direction as seen on screen (required for drive and nut marks).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tighten: Option<Spin>,
    /// A disc seen obliquely appears as this ellipse.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ellipse: Option<Ellipse>,
}

/// A side-view mark: a stripe along the bar, whose offset across the bar gives its angle.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SideMark {
    /// Two points on the bar's centre line bounding the stretch where the stripe is, in pixels.
    pub axis: [[f64; 2]; 2],
    /// The bar's radius on screen, in pixels.
    pub radius_px: f64,
    /// Screen direction in which the camera-facing stripe moves when the bar tightens.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tighten: Option<ScreenDir>,
    /// Number of stripes equally spaced around the bar (default 1).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub stripes: Option<u32>,
}

/// An oblique disc's outline: minor over major axis, and the major axis direction.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Ellipse {
    /// Minor over major axis, 0 < b/a ≤ 1.
    pub axis_ratio: f64,
    /// Direction of the major axis on screen, degrees from +x towards +y.
    pub major_deg: f64,
}

/// Rotation sense as seen on screen.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Spin {
    /// Clockwise on screen.
    Cw,
    /// Counter-clockwise on screen.
    Ccw,
}

impl Spin {
    /// +1 when a positive screen angle (from +x towards +y, clockwise on screen) is tightening.
    pub fn sign(self) -> f64 {
        match self {
            Spin::Cw => 1.0,
            Spin::Ccw => -1.0,
        }
    }
}

/// A screen direction.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum ScreenDir {
    /// Towards −y.
    Up,
    /// Towards +y.
    Down,
    /// Towards −x.
    Left,
    /// Towards +x.
    Right,
}

impl ScreenDir {
    /// The unit vector on screen (x right, y down).
    pub fn vector(self) -> [f64; 2] {
        match self {
            ScreenDir::Up => [0.0, -1.0],
            ScreenDir::Down => [0.0, 1.0],
            ScreenDir::Left => [-1.0, 0.0],
            ScreenDir::Right => [1.0, 0.0],
        }
    }
}

/// The role a mark plays.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Role {
    /// Drive end, at the anvil.
    Drive,
    /// Nut end, at the socket.
    Nut,
    /// A fixed reference.
    Fixed,
}

impl Role {
    /// The role's name as used in the rig and reports.
    pub fn name(self) -> &'static str {
        match self {
            Role::Drive => "drive",
            Role::Nut => "nut",
            Role::Fixed => "fixed",
        }
    }
}

impl Rig {
    /// The rolling shutter's readout time, s, when the rig gives one above zero.
    pub fn rolling_shutter_s(&self) -> Option<f64> {
        self.camera
            .and_then(|c| c.rolling_shutter_ms)
            .filter(|&t| t > 0.0)
            .map(|t| t * 1e-3)
    }

    /// Reads and validates a rig file.
    ///
    /// # Errors
    /// [`Error::Io`] when the file cannot be read, [`Error::Rig`] naming the field when it
    /// is malformed or out of range.
    pub fn from_path(path: &Path) -> Result<Rig> {
        if let Err(e) = std::fs::metadata(path)
            && e.kind() == std::io::ErrorKind::NotFound
        {
            return Err(Error::input(
                path,
                "no such rig file; check the --rig path, or draft a rig from the clip with \
                 `twistmark find-marks CLIP --out rig.json`",
            ));
        }
        let text = crate::limits::read_text(path, "rig")?;
        Rig::from_json_str(&text, path)
    }

    /// Parses and validates rig JSON; `path` is only used in messages.
    ///
    /// # Errors
    /// [`Error::Rig`] naming the field when the JSON is malformed or a value is out of range.
    pub fn from_json_str(text: &str, path: &Path) -> Result<Rig> {
        let mut de = serde_json::Deserializer::from_str(text);
        let rig: Rig = serde_path_to_error::deserialize(&mut de).map_err(|e| {
            let field = e.path().to_string();
            let inner = e.into_inner();
            let field = if field == "." {
                "(top level)".to_string()
            } else {
                field
            };
            let mut reason = inner.to_string();
            match inner.classify() {
                serde_json::error::Category::Eof => {
                    reason = format!(
                        "the file ends in the middle of the JSON (line {}): it looks cut short; \
                         restore the whole rig (the README shows the rig format)",
                        inner.line()
                    );
                }
                serde_json::error::Category::Syntax => reason.push_str(
                    "; the file is not valid JSON there: check the commas, quotes and brackets",
                ),
                _ => {}
            }
            if reason.contains("missing field") || reason.contains("unknown field") {
                reason.push_str("; check the spelling against the rig format in the README");
            }
            rig_err(path, &field, reason)
        })?;
        // Trailing text (a second rig pasted after the first, a stray note) is refused, so
        // that what is used is the whole file.
        de.end().map_err(|e| {
            rig_err(
                path,
                "(after the rig)",
                format!("text follows the rig's closing brace ({e}); keep one rig per file"),
            )
        })?;
        rig.validate(path)?;
        Ok(rig)
    }

    /// Serialises the rig as pretty JSON.
    pub fn to_json_pretty(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_default()
    }

    /// The marks present, with their roles, in the order drive, nut, fixed.
    pub fn marks(&self) -> Vec<(Role, &Mark)> {
        let mut v = vec![
            (Role::Drive, &self.marks.drive),
            (Role::Nut, &self.marks.nut),
        ];
        if let Some(f) = &self.marks.fixed {
            v.push((Role::Fixed, f));
        }
        v
    }

    /// Checks every value that does not depend on the frame size.
    fn validate(&self, path: &Path) -> Result<()> {
        if self.rig_version != RIG_VERSION {
            return Err(rig_err(
                path,
                "rig_version",
                format!(
                    "this build reads rig_version {RIG_VERSION}, got {}",
                    self.rig_version
                ),
            ));
        }
        if let Some(fps) = self.capture_fps_hz
            && !(fps.is_finite() && fps > 0.0)
        {
            return Err(rig_err(
                path,
                "capture_fps_hz",
                format!("must be a positive frame rate in Hz, got {fps}"),
            ));
        }
        if let Some(t) = self.camera.and_then(|c| c.rolling_shutter_ms)
            && !(t.is_finite() && (0.0..=MAX_ROLLING_SHUTTER_MS).contains(&t))
        {
            return Err(rig_err(
                path,
                "camera.rolling_shutter_ms",
                format!(
                    "must be the sensor's readout time from top row to bottom row in ms, \
                     0 to {MAX_ROLLING_SHUTTER_MS}, got {t}; phones read out in 5 to 30 ms"
                ),
            ));
        }
        for (role, mark) in self.marks() {
            validate_mark(path, role, mark)?;
        }
        if let Some(bar) = &self.bar {
            bar.validate().map_err(|e| match e {
                Error::Bar { field, reason } => rig_err(path, &field, reason),
                other => other,
            })?;
        }
        crate::sanity::check_rig(self, path)
    }

    /// Checks that every mark's pivot and annulus (or axis) lie inside a frame of this size.
    ///
    /// # Errors
    /// [`Error::Rig`] naming the mark's field and the frame size.
    pub fn check_frame(&self, path: &Path, width: u32, height: u32) -> Result<()> {
        let (w, h) = (f64::from(width), f64::from(height));
        let inside =
            |p: [f64; 2]| p[0] >= -0.5 && p[1] >= -0.5 && p[0] <= w - 0.5 && p[1] <= h - 0.5;
        for (role, mark) in self.marks() {
            let base = format!("marks.{}", role.name());
            match mark {
                Mark::Radial(m) => {
                    if !inside(m.pivot) {
                        return Err(rig_err(
                            path,
                            &format!("{base}.pivot"),
                            format!(
                                "[{}, {}] is outside the {width}x{height} frame; read the pivot off the first frame",
                                m.pivot[0], m.pivot[1]
                            ),
                        ));
                    }
                    let r = m.radius[1];
                    let fits = inside([m.pivot[0] - r, m.pivot[1] - r])
                        && inside([m.pivot[0] + r, m.pivot[1] + r]);
                    if !fits {
                        return Err(rig_err(
                            path,
                            &format!("{base}.radius"),
                            format!(
                                "the annulus (outer radius {r} px around [{}, {}]) leaves the {width}x{height} frame; reduce radius[1]",
                                m.pivot[0], m.pivot[1]
                            ),
                        ));
                    }
                }
                Mark::Side(m) => {
                    for (i, p) in m.axis.iter().enumerate() {
                        if !inside(*p) {
                            return Err(rig_err(
                                path,
                                &format!("{base}.axis[{i}]"),
                                format!(
                                    "[{}, {}] is outside the {width}x{height} frame",
                                    p[0], p[1]
                                ),
                            ));
                        }
                    }
                }
            }
        }
        Ok(())
    }
}

fn rig_err(path: &Path, field: &str, reason: impl Into<String>) -> Error {
    Error::Rig {
        path: PathBuf::from(path),
        field: field.to_string(),
        reason: reason.into(),
    }
}

fn validate_mark(path: &Path, role: Role, mark: &Mark) -> Result<()> {
    let base = format!("marks.{}", role.name());
    let finite = |field: &str, v: f64| -> Result<()> {
        if v.is_finite() {
            Ok(())
        } else {
            Err(rig_err(
                path,
                &format!("{base}.{field}"),
                format!("must be a finite number, got {v}"),
            ))
        }
    };
    match mark {
        Mark::Radial(m) => {
            finite("pivot", m.pivot[0])?;
            finite("pivot", m.pivot[1])?;
            let [ri, ro] = m.radius;
            finite("radius", ri)?;
            finite("radius", ro)?;
            if ri < 0.0 || ro <= 0.0 {
                return Err(rig_err(
                    path,
                    &format!("{base}.radius"),
                    format!("radii must be positive pixel distances, got [{ri}, {ro}]"),
                ));
            }
            if ri >= ro {
                return Err(rig_err(
                    path,
                    &format!("{base}.radius"),
                    format!(
                        "inner radius {ri} must be less than outer radius {ro}; give [r_inner, r_outer]"
                    ),
                ));
            }
            if ro - ri < 2.0 {
                return Err(rig_err(
                    path,
                    &format!("{base}.radius"),
                    format!(
                        "the annulus is only {:.1} px wide; make it at least 2 px so the stripe can be found",
                        ro - ri
                    ),
                ));
            }
            if role != Role::Fixed && m.tighten.is_none() {
                return Err(rig_err(
                    path,
                    &format!("{base}.tighten"),
                    "missing: say which way the mark turns when tightening, \"cw\" or \"ccw\" as seen on screen",
                ));
            }
            if let Some(e) = m.ellipse {
                finite("ellipse.major_deg", e.major_deg)?;
                if !(e.axis_ratio.is_finite() && e.axis_ratio > 0.0 && e.axis_ratio <= 1.0) {
                    return Err(rig_err(
                        path,
                        &format!("{base}.ellipse.axis_ratio"),
                        format!(
                            "must be minor over major axis, 0 < b/a <= 1, got {}",
                            e.axis_ratio
                        ),
                    ));
                }
                if e.axis_ratio < 0.2 {
                    return Err(rig_err(
                        path,
                        &format!("{base}.ellipse.axis_ratio"),
                        format!(
                            "{} is too oblique to measure (more than 78 degrees of tilt); film the disc more squarely",
                            e.axis_ratio
                        ),
                    ));
                }
            }
        }
        Mark::Side(m) => {
            for p in &m.axis {
                finite("axis", p[0])?;
                finite("axis", p[1])?;
            }
            finite("radius_px", m.radius_px)?;
            if m.radius_px <= 0.0 {
                return Err(rig_err(
                    path,
                    &format!("{base}.radius_px"),
                    format!(
                        "must be the bar's positive radius on screen in pixels, got {}",
                        m.radius_px
                    ),
                ));
            }
            let d = ((m.axis[1][0] - m.axis[0][0]).powi(2) + (m.axis[1][1] - m.axis[0][1]).powi(2))
                .sqrt();
            if d < 4.0 {
                return Err(rig_err(
                    path,
                    &format!("{base}.axis"),
                    "the two axis points must be at least 4 px apart along the bar",
                ));
            }
            if role != Role::Fixed && m.tighten.is_none() {
                return Err(rig_err(
                    path,
                    &format!("{base}.tighten"),
                    "missing: give the screen direction (\"up\", \"down\", \"left\", \"right\") in which the stripe moves when tightening",
                ));
            }
            if m.stripes == Some(0) {
                return Err(rig_err(
                    path,
                    &format!("{base}.stripes"),
                    "must be at least 1",
                ));
            }
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    const GOOD: &str = r#"{
      "rig_version": 1,
      "capture_fps_hz": 2000,
      "marks": {
        "drive": {"kind": "radial", "pivot": [160, 120], "radius": [30, 60], "tighten": "cw"},
        "nut":   {"kind": "radial", "pivot": [480, 120], "radius": [30, 60], "tighten": "cw"},
        "fixed": {"kind": "radial", "pivot": [320, 400], "radius": [10, 30]}
      },
      "bar": {
        "sections": [ {"shape": "round", "length_mm": 150, "d_mm": 16},
                      {"shape": "tube",  "length_mm": 40,  "d_mm": 22, "bore_mm": 14},
                      {"shape": "hex",   "length_mm": 30,  "across_flats_mm": 19},
                      {"shape": "square","length_mm": 25,  "side_mm": 12.7} ],
        "shear_modulus_gpa": 79.3,
        "rating_nm": 136
      }
    }"#;

    fn parse(s: &str) -> Result<Rig> {
        Rig::from_json_str(s, Path::new("rig.json"))
    }

    fn msg(s: &str) -> String {
        parse(s).unwrap_err().to_string()
    }

    #[test]
    fn interface_example_parses() {
        let rig = parse(GOOD).unwrap();
        assert_eq!(rig.capture_fps_hz, Some(2000.0));
        assert_eq!(rig.marks().len(), 3);
        assert!(rig.check_frame(Path::new("r"), 640, 480).is_ok());
        let again = parse(&rig.to_json_pretty()).unwrap();
        assert_eq!(again, rig);
    }

    #[test]
    fn the_cameras_readout_time_is_read_and_checked() {
        let with = |camera: &str| GOOD.replace("\"capture_fps_hz\": 2000,", camera);
        let rig = parse(&with(r#""camera": {"rolling_shutter_ms": 10},"#)).unwrap();
        assert_eq!(rig.rolling_shutter_s(), Some(0.010));
        assert_eq!(parse(&rig.to_json_pretty()).unwrap(), rig);
        let global = parse(&with(r#""camera": {"rolling_shutter_ms": 0},"#)).unwrap();
        assert_eq!(global.rolling_shutter_s(), None);
        for bad in ["-1", "5000"] {
            let m = msg(&with(&format!(
                r#""camera": {{"rolling_shutter_ms": {bad}}},"#
            )));
            assert!(m.contains("camera.rolling_shutter_ms"), "{m}");
        }
        let m = msg(&with(r#""camera": {"readout_ms": 10},"#));
        assert!(m.contains("readout_ms"), "{m}");
    }

    #[test]
    fn unknown_field_is_named() {
        let m = msg(&GOOD.replace(
            "\"tighten\": \"cw\"},\n        \"nut\"",
            "\"tighten\": \"cw\", \"colour\": 3},\n        \"nut\"",
        ));
        assert!(m.contains("colour"), "{m}");
        assert!(m.contains("marks.drive"), "{m}");
        let m = msg(&GOOD.replace("\"capture_fps_hz\"", "\"capture_fps\""));
        assert!(m.contains("capture_fps"), "{m}");
    }

    #[test]
    fn bad_radii_are_rejected_with_field() {
        let m = msg(&GOOD.replace(
            "\"radius\": [30, 60], \"tighten\": \"cw\"},\n        \"nut\"",
            "\"radius\": [60, 30], \"tighten\": \"cw\"},\n        \"nut\"",
        ));
        assert!(
            m.contains("marks.drive.radius") && m.contains("less than"),
            "{m}"
        );
        let m = msg(&GOOD.replace("[10, 30]", "[-1, 30]"));
        assert!(m.contains("marks.fixed.radius"), "{m}");
    }

    #[test]
    fn missing_nut_mark_is_named() {
        let s = GOOD.replace(
            "\"nut\":   {\"kind\": \"radial\", \"pivot\": [480, 120], \"radius\": [30, 60], \"tighten\": \"cw\"},\n",
            "",
        );
        let m = msg(&s);
        assert!(m.contains("nut"), "{m}");
    }

    #[test]
    fn pivot_outside_frame_is_rejected() {
        let rig = parse(GOOD).unwrap();
        let e = rig
            .check_frame(Path::new("r"), 320, 240)
            .unwrap_err()
            .to_string();
        assert!(e.contains("marks.nut.pivot"), "{e}");
        let e = rig
            .check_frame(Path::new("r"), 520, 480)
            .unwrap_err()
            .to_string();
        assert!(e.contains("marks.nut.radius"), "{e}");
    }

    #[test]
    fn malformed_json_and_bad_fps() {
        assert!(msg("{ not json").contains("rig.json"));
        let m = msg(&GOOD.replace("2000", "-3"));
        assert!(m.contains("capture_fps_hz"), "{m}");
        let m = msg(&GOOD.replace(
            ", \"tighten\": \"cw\"},\n        \"nut\"",
            "},\n        \"nut\"",
        ));
        assert!(m.contains("marks.drive.tighten"), "{m}");
    }

    #[test]
    fn side_mark_parses() {
        let s = GOOD.replace(
            "\"nut\":   {\"kind\": \"radial\", \"pivot\": [480, 120], \"radius\": [30, 60], \"tighten\": \"cw\"}",
            "\"nut\": {\"kind\": \"side\", \"axis\": [[300, 200], [400, 200]], \"radius_px\": 20, \"tighten\": \"up\"}",
        );
        let rig = parse(&s).unwrap();
        assert!(matches!(rig.marks.nut, Mark::Side(_)));
    }
}

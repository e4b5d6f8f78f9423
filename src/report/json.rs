//! The `report.json` schema (interface v1 plus extensions) as plain serde structs, and its
//! construction from an [`Analysis`]. Every number carries its unit in its key; an unknown
//! value is `null`. The v1 keys of the interface are never renamed or removed.
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use serde::{Deserialize, Serialize};

use super::provenance::{ClipJson, ToolJson, WindowJson};
use crate::analyze::{Analysis, FpsSource};
use crate::units::{Angle, Torque};

/// Version of this report layout, written as `"report_version"`.
pub const REPORT_VERSION: u32 = 1;

/// The whole `report.json` document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Report {
    /// Layout version ([`REPORT_VERSION`]).
    pub report_version: u32,
    /// Capture rate used for all timing, frames per second.
    pub fps: f64,
    /// Number of analysed frames (entries in the trace).
    pub frames: usize,
    /// Every warning, one line each.
    pub warnings: Vec<String>,
    /// That a torque from video is a model, and what to finish wheel nuts with.
    pub caution: String,
    /// The clip analysed: path, size and SHA-256 (interface v2, "Provenance"). Reports from
    /// earlier versions, where this was the path alone, still read.
    #[serde(deserialize_with = "super::provenance::clip_from_either")]
    pub clip: ClipJson,
    /// Frames in the whole clip.
    pub clip_frames: u64,
    /// Where the capture rate came from: `option` (--fps), `rig` or `container`.
    pub fps_source: String,
    /// Per-frame angles.
    pub trace: TraceJson,
    /// One entry per blow.
    pub blows: Vec<BlowJson>,
    /// Clip-level results.
    pub summary: SummaryJson,
    /// The bar: stiffness per section, stress at the rating and at the measured peak, timing.
    /// (The form of `twistmark bar --json`.)
    pub bar: Option<serde_json::Value>,
    /// Could the bar spring back between blows? Model against measurement, in one sentence.
    pub springback: Option<serde_json::Value>,
    /// The program and version that wrote this report.
    #[serde(default = "ToolJson::this")]
    pub tool: ToolJson,
    /// When this report was written, ISO 8601 in UTC.
    #[serde(default)]
    pub created_utc: String,
    /// The rig as read (after defaults were filled in), so the report stands on its own.
    #[serde(default)]
    pub rig: serde_json::Value,
    /// The analysed frames.
    #[serde(default)]
    pub window: WindowJson,
    /// Per mark, how much of it was measured: the share of frames lost and a confidence
    /// (docs/outputs.md, "Mark quality"). Absent in reports written before it existed.
    #[serde(default)]
    pub mark_quality: MarkQualityJson,
    /// The blow model fitted to this clip (docs/mechanics.md, "The blow model"), or
    /// `{"error": reason}` when it could not be fitted; absent without a bar.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub model: Option<serde_json::Value>,
}

/// `report.json`'s `mark_quality`: the drive and nut marks' self-check results.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct MarkQualityJson {
    /// The drive mark.
    pub drive: MarkJson,
    /// The nut mark.
    pub nut: MarkJson,
}

/// One mark's quality over the analysed frames.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct MarkJson {
    /// Share of the analysed frames where the mark is null (lost, faded into the background,
    /// or refused by a physics self-check), 0..=1.
    pub lost_fraction: f64,
    /// The mean of the per-frame confidences, 0 for each lost frame, 0..=1.
    pub confidence: f64,
    /// What the mark was tracked on: `luma` (brightness) or `colour` (the projection of
    /// luma and chroma that best separates its paint from its metal; `luma` in reports
    /// written before it was recorded).
    #[serde(default)]
    pub signal: crate::track::Signal,
}

impl MarkJson {
    fn of(angles: &[Option<Angle>], confidence: &[f32], signal: crate::track::Signal) -> MarkJson {
        MarkJson {
            lost_fraction: crate::track::lost_share(angles),
            confidence: crate::track::clip_confidence(angles, confidence),
            signal,
        }
    }
}

/// `report.json`'s `trace`: one entry per analysed frame, `null` where a mark was lost.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TraceJson {
    /// Time, s: clip frame index / capture rate, or the frame's timestamp when
    /// `summary.timing.source` is `timestamps`.
    pub t_s: Vec<f64>,
    /// Clip frame index.
    pub frame: Vec<u64>,
    /// Drive-end angle, degrees, 0 at the first analysed frame, tightening positive.
    pub drive_deg: Vec<Option<f64>>,
    /// Nut-end angle, degrees.
    pub nut_deg: Vec<Option<f64>>,
    /// drive − nut, degrees.
    pub twist_deg: Vec<Option<f64>>,
    /// Tracker confidence of each drive angle, 0 to 1.
    pub drive_confidence: Vec<f64>,
    /// Tracker confidence of each nut angle, 0 to 1.
    pub nut_confidence: Vec<f64>,
    /// True where the frame was repeated or synthesised, not captured: its angles are shown
    /// but not used for peaks, onsets or timing (empty in reports that predate it).
    #[serde(default)]
    pub synthetic: Vec<bool>,
}

/// One entry of `report.json`'s `blows`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BlowJson {
    /// 1-based blow number.
    pub index: usize,
    /// Clip frame index of the drive end's onset.
    pub frame: u64,
    /// The onset frame's time, s (`frame / fps`, or its timestamp; see the trace's `t_s`).
    pub t_s: f64,
    /// Drive-end advance from just before this blow to just before the next, degrees.
    pub drive_advance_deg: Option<f64>,
    /// Nut-end advance over the same span, degrees.
    pub nut_advance_deg: Option<f64>,
    /// Largest twist between this blow and the next, degrees.
    pub peak_twist_deg: Option<f64>,
    /// Stiffness × peak twist, N·m.
    pub peak_torque_nm: Option<f64>,
    /// Twist just before the next blow (end of clip for the last blow), degrees.
    pub residual_twist_deg: Option<f64>,
    /// Drive onset to nut onset, ms (null when the nut did not move).
    pub nut_lag_ms: Option<f64>,
    /// Peak torque, lbf·ft.
    pub peak_torque_lbf_ft: Option<f64>,
    /// Stiffness × residual twist, N·m.
    pub residual_torque_nm: Option<f64>,
    /// Clip frame index of the nut's onset.
    pub nut_onset_frame: Option<u64>,
    /// Twist when the nut first moved in this blow, degrees.
    pub breakaway_twist_deg: Option<f64>,
    /// Stiffness × breakaway twist, N·m.
    pub breakaway_torque_nm: Option<f64>,
    /// The nut advance reached the summary's `nut_stop_threshold_deg`.
    pub nut_advanced: bool,
    /// 95 % interval of the peak twist, `[low, high]`, degrees (interface v2).
    pub peak_twist_ci95_deg: Option<[f64; 2]>,
    /// 95 % interval of the peak torque, `[low, high]`, N·m (interface v2).
    pub peak_torque_ci95_nm: Option<[f64; 2]>,
    /// Frames from the onset to the peak twist.
    pub rise_frames: Option<usize>,
    /// Largest fraction by which the sampled peak can read low (null when the rise is
    /// sampled finely enough).
    pub peak_under_read_ratio: Option<f64>,
    /// The nut did not advance in this blow (the blows the spring-back gain is measured on).
    #[serde(default)]
    pub nut_held: bool,
    /// Twist just before this blow: the wind-up it struck, degrees.
    #[serde(default)]
    pub pre_strike_twist_deg: Option<f64>,
    /// θp/√(θp² − θr²): how much that wind-up raised this blow's peak (held blows only).
    #[serde(default)]
    pub springback_torque_gain_ratio: Option<f64>,
    /// Energy the blow put into the bar, ½k(θp² − θr²), J (held blows only).
    #[serde(default)]
    pub blow_energy_j: Option<f64>,
    /// Time constant of the unwind after this blow's peak, ms (null when not resolved).
    #[serde(default)]
    pub unwind_time_constant_ms: Option<f64>,
    /// `exponential` or `log_decrement`.
    #[serde(default)]
    pub unwind_decay_method: Option<String>,
    /// Damping ratio of that unwind (log decrement only).
    #[serde(default)]
    pub unwind_damping_ratio: Option<f64>,
    /// Natural frequency of that unwind, Hz (log decrement only).
    #[serde(default)]
    pub unwind_natural_frequency_hz: Option<f64>,
    /// Drive onset interpolated within the frame, s of capture time.
    #[serde(default)]
    pub onset_subframe_t_s: Option<f64>,
    /// Nut onset interpolated within the frame, s.
    #[serde(default)]
    pub nut_onset_subframe_t_s: Option<f64>,
    /// Nut lag from the interpolated onsets, ms.
    #[serde(default)]
    pub nut_lag_subframe_ms: Option<f64>,
    /// ±1.96 standard uncertainties of that lag from the angle noise alone, ms (the form of the
    /// motion adds more: docs/mechanics.md, "Sub-frame timing").
    #[serde(default)]
    pub nut_lag_noise_ci95_ms: Option<f64>,
    /// Twist at the interpolated nut onset, degrees.
    #[serde(default)]
    pub breakaway_subframe_twist_deg: Option<f64>,
    /// Stiffness × that twist, N·m.
    #[serde(default)]
    pub breakaway_subframe_torque_nm: Option<f64>,
}

/// `report.json`'s `summary`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SummaryJson {
    /// Number of blows.
    pub blow_count: usize,
    /// 60 / median blow interval, blows per minute.
    pub blow_rate_per_min: Option<f64>,
    /// Drive end's total rotation, degrees.
    pub drive_total_deg: Option<f64>,
    /// Nut end's total rotation, degrees.
    pub nut_total_deg: Option<f64>,
    /// Stiffness used for torque, N·m/deg.
    pub bar_stiffness_nm_per_deg: Option<f64>,
    /// Highest peak torque over all blows, N·m.
    pub peak_torque_nm: Option<f64>,
    /// Standard deviation of the per-interval blow rates, blows per minute.
    pub blow_rate_spread_per_min: Option<f64>,
    /// Stiffness used for torque, N·m/rad.
    pub bar_stiffness_nm_per_rad: Option<f64>,
    /// `calibrated` (the rig's calibrated_stiffness_nm_per_deg) or `computed` (sections).
    pub stiffness_source: Option<String>,
    /// The bar's rated torque, N·m.
    pub bar_rating_nm: Option<f64>,
    /// Highest peak torque, lbf·ft.
    pub peak_torque_lbf_ft: Option<f64>,
    /// Highest peak torque / rating.
    pub peak_torque_to_rating_ratio: Option<f64>,
    /// Per-blow nut advance below which the nut counts as not turning, degrees.
    pub nut_stop_threshold_deg: f64,
    /// Blows whose nut advance reached the threshold.
    pub nut_advancing_blow_count: usize,
    /// The blow after which the nut stayed below the threshold to the end of the clip.
    pub nut_stopped_after_blow: Option<usize>,
    /// Highest peak torque on a blow in which the nut still advanced, N·m.
    pub peak_torque_nut_advancing_nm: Option<f64>,
    /// Twist at the end of the clip, degrees.
    pub residual_twist_end_deg: Option<f64>,
    /// Largest maximum shear stress over the bar's sections at the peak torque, MPa.
    pub peak_shear_stress_mpa: Option<f64>,
    /// That stress over the section's shear yield (null when no yield strength is known).
    pub peak_stress_to_shear_yield_ratio: Option<f64>,
    /// Estimated angle noise of the drive end (one frame, σ), degrees.
    pub drive_noise_deg: Option<f64>,
    /// Estimated angle noise of the nut end (one frame, σ), degrees.
    pub nut_noise_deg: Option<f64>,
    /// What every twist is measured from: the bar at rest (interface v2).
    pub twist_zero: TwistZeroJson,
    /// Standard uncertainty of every twist reading from tracking errors that the noise
    /// above does not show, degrees: the tracker's validated figure for this kind of
    /// recording (lossless or lossy), carried by every twist and torque interval (0 in
    /// reports written before it was).
    #[serde(default)]
    pub twist_tracking_sigma_deg: f64,
    /// The torque the joint holds after the last blow that turned the nut, N·m (interface
    /// v2; null without a bar or a measured slip).
    pub holding_torque_nm: Option<f64>,
    /// Its 95 % interval, `[low, high]`, N·m.
    pub holding_torque_ci95_nm: Option<[f64; 2]>,
    /// Bounds on the torque that would restart the nut, `[low, high]`, N·m: the highest peak
    /// of a later blow that did not move it, and the torque at which a later blow did.
    pub holding_torque_bracket_nm: [Option<f64>; 2],
    /// The last blow that turned the nut (the holding torque is read after it).
    pub holding_after_blow: Option<usize>,
    /// Slips the holding torque rests on.
    pub holding_slip_count: usize,
    /// The joint's rate fitted over those slips, N·m per degree of nut turn.
    pub joint_rate_nm_per_deg: Option<f64>,
    /// The clock that timed the frames, and the frames that were not captured (interface v2,
    /// "Footage from phones and consumer cameras").
    #[serde(default)]
    pub timing: TimingJson,
}

/// `summary.timing`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TimingJson {
    /// `capture_rate` (frame index / capture rate) or `timestamps` (each frame's own).
    pub source: String,
    /// Frames that repeat the frame before them.
    pub duplicated_frames: usize,
    /// Frames that blend or interpolate their neighbours.
    pub interpolated_frames: usize,
    /// Median interval between the analysed frames' timestamps, ms (null without them).
    #[serde(default)]
    pub median_interval_ms: Option<f64>,
    /// The timestamp interval furthest from the median, ms.
    #[serde(default)]
    pub worst_interval_ms: Option<f64>,
    /// The rate at which the frames were really captured, when many were not, Hz.
    #[serde(default)]
    pub captured_fps_estimate_hz: Option<f64>,
    /// A rolling shutter's readout time the stripes' shear shows, ms (null when the clip does
    /// not show one).
    #[serde(default)]
    pub rolling_shutter_estimate_ms: Option<f64>,
    /// Its 95 % interval, ms.
    #[serde(default)]
    pub rolling_shutter_estimate_ci95_ms: Option<[f64; 2]>,
}

impl Default for TimingJson {
    fn default() -> Self {
        TimingJson {
            source: "capture_rate".into(),
            duplicated_frames: 0,
            interpolated_frames: 0,
            median_interval_ms: None,
            worst_interval_ms: None,
            captured_fps_estimate_hz: None,
            rolling_shutter_estimate_ms: None,
            rolling_shutter_estimate_ci95_ms: None,
        }
    }
}

/// `summary.twist_zero`: where the twist zero came from and the twist already in the bar at
/// the first analysed frame.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TwistZeroJson {
    /// `still`, `frame`, `quiet_start` or `first_frame_unverified`.
    pub source: String,
    /// The clip frame that showed the bar at rest (null for a still).
    pub frame: Option<u64>,
    /// Twist in the bar at the first analysed frame, degrees (added to drive − nut).
    pub offset_deg: f64,
    /// Standard uncertainty (1σ) of `offset_deg`, degrees.
    pub offset_sigma_deg: f64,
}

fn deg(a: Option<Angle>) -> Option<f64> {
    a.map(Angle::deg).filter(|v| v.is_finite())
}

fn nm(t: Option<Torque>) -> Option<f64> {
    t.map(Torque::nm).filter(|v| v.is_finite())
}

fn lbf_ft(t: Option<Torque>) -> Option<f64> {
    t.map(Torque::lbf_ft).filter(|v| v.is_finite())
}

/// A confidence as written: 0 to 1, four decimals (an f32 widened to f64 would otherwise
/// print as 0.8999999761581421).
fn confidence(c: Option<f32>) -> f64 {
    let c = f64::from(c.unwrap_or(0.0));
    if c.is_finite() {
        (c.clamp(0.0, 1.0) * 1e4).round() / 1e4
    } else {
        0.0
    }
}

fn finite(v: Option<f64>) -> Option<f64> {
    v.filter(|x| x.is_finite())
}

/// Builds the report document for an analysis.
pub fn report(a: &Analysis) -> Report {
    let tr = &a.trace;
    let n = tr.len();
    let stiffness = a.summary.stiffness;
    let zero = a.summary.twist_zero;
    let trace = TraceJson {
        t_s: (0..n).map(|i| tr.t_s(i)).collect(),
        frame: tr.frames.clone(),
        drive_deg: (0..n)
            .map(|i| deg(tr.drive.get(i).copied().flatten()))
            .collect(),
        nut_deg: (0..n)
            .map(|i| deg(tr.nut.get(i).copied().flatten()))
            .collect(),
        twist_deg: (0..n)
            .map(|i| {
                let d = tr.drive.get(i).copied().flatten()?;
                let u = tr.nut.get(i).copied().flatten()?;
                deg(Some(d - u + zero.offset))
            })
            .collect(),
        drive_confidence: (0..n)
            .map(|i| confidence(tr.drive_confidence.get(i).copied()))
            .collect(),
        nut_confidence: (0..n)
            .map(|i| confidence(tr.nut_confidence.get(i).copied()))
            .collect(),
        synthetic: (0..n).map(|i| tr.is_synthetic(i)).collect(),
    };
    let blows = a
        .blows
        .iter()
        .map(|b| BlowJson {
            index: b.index,
            frame: b.frame,
            t_s: b.t_s,
            drive_advance_deg: deg(b.drive_advance),
            nut_advance_deg: deg(b.nut_advance),
            peak_twist_deg: deg(b.peak_twist),
            peak_torque_nm: nm(b.peak_torque),
            residual_twist_deg: deg(b.residual_twist),
            nut_lag_ms: finite(b.nut_lag_s.map(|s| s * 1e3)),
            peak_torque_lbf_ft: lbf_ft(b.peak_torque),
            residual_torque_nm: nm(stiffness.zip(b.residual_twist).map(|(k, t)| k * t)),
            nut_onset_frame: b.nut_onset_frame,
            breakaway_twist_deg: deg(b.breakaway_twist),
            breakaway_torque_nm: nm(b.breakaway_torque),
            nut_advanced: b.nut_advanced,
            peak_twist_ci95_deg: b
                .peak_twist_ci95
                .map(|(l, h)| [l.deg(), h.deg()])
                .filter(|v| v.iter().all(|x| x.is_finite())),
            peak_torque_ci95_nm: b
                .peak_torque_ci95
                .map(|(l, h)| [l.nm(), h.nm()])
                .filter(|v| v.iter().all(|x| x.is_finite())),
            rise_frames: b.rise_frames,
            peak_under_read_ratio: finite(b.peak_under_read),
            nut_held: b.unwind.held,
            pre_strike_twist_deg: deg(b.unwind.pre_strike_twist),
            springback_torque_gain_ratio: finite(b.unwind.torque_gain),
            blow_energy_j: finite(b.unwind.energy_j),
            unwind_time_constant_ms: finite(b.unwind.decay.map(|d| 1e3 * d.time_constant_s())),
            unwind_decay_method: b.unwind.decay.map(|d| {
                match d.method {
                    crate::mechanics::DecayMethod::Exponential => "exponential",
                    crate::mechanics::DecayMethod::LogDecrement => "log_decrement",
                }
                .to_string()
            }),
            unwind_damping_ratio: finite(b.unwind.decay.and_then(|d| d.damping_ratio)),
            unwind_natural_frequency_hz: finite(
                b.unwind.decay.and_then(|d| d.natural_frequency_hz),
            ),
            onset_subframe_t_s: finite(b.onset_subframe_s),
            nut_onset_subframe_t_s: finite(b.nut_onset_subframe_s),
            nut_lag_subframe_ms: finite(b.nut_lag_subframe_s.map(|s| s * 1e3)),
            nut_lag_noise_ci95_ms: finite(b.nut_lag_subframe_sigma_s.map(|s| 1.96e3 * s)),
            breakaway_subframe_twist_deg: deg(b.breakaway_subframe_twist),
            breakaway_subframe_torque_nm: nm(b.breakaway_subframe_torque),
        })
        .collect();
    let s = &a.summary;
    let summary = SummaryJson {
        blow_count: s.blow_count,
        blow_rate_per_min: finite(s.blow_rate_per_min),
        drive_total_deg: deg(s.drive_total),
        nut_total_deg: deg(s.nut_total),
        bar_stiffness_nm_per_deg: finite(stiffness.map(|k| k.nm_per_deg())),
        peak_torque_nm: nm(s.peak_torque),
        blow_rate_spread_per_min: finite(s.blow_rate_spread_per_min),
        bar_stiffness_nm_per_rad: finite(stiffness.map(|k| k.nm_per_rad())),
        stiffness_source: s.stiffness_source.map(|x| x.as_str().to_string()),
        bar_rating_nm: nm(s.rating),
        peak_torque_lbf_ft: lbf_ft(s.peak_torque),
        peak_torque_to_rating_ratio: finite(s.peak_to_rating),
        nut_stop_threshold_deg: s.nut_stop_threshold.deg(),
        nut_advancing_blow_count: s.nut_advancing_blows,
        nut_stopped_after_blow: s.nut_stopped_after_blow,
        peak_torque_nut_advancing_nm: nm(s.peak_torque_nut_advancing),
        residual_twist_end_deg: deg(s.residual_twist_end),
        peak_shear_stress_mpa: finite(
            a.bar
                .as_ref()
                .zip(s.peak_torque)
                .map(|(b, t)| b.max_shear_stress(t).stress_pa * 1e-6),
        ),
        peak_stress_to_shear_yield_ratio: finite(
            a.bar
                .as_ref()
                .zip(s.peak_torque)
                .and_then(|(b, t)| b.max_stress_ratio(t))
                .map(|(_, r)| r),
        ),
        drive_noise_deg: deg(a.segmentation.drive_noise),
        nut_noise_deg: deg(a.segmentation.nut_noise),
        twist_zero: TwistZeroJson {
            source: zero.source.as_str().to_string(),
            frame: zero.frame,
            offset_deg: zero.offset.deg(),
            offset_sigma_deg: zero.offset_sigma.deg(),
        },
        twist_tracking_sigma_deg: s.tracking_sigma.deg(),
        holding_torque_nm: nm(s.holding.map(|h| h.torque)),
        holding_torque_ci95_nm: s
            .holding
            .map(|h| [h.ci95.0.nm(), h.ci95.1.nm()])
            .filter(|v| v.iter().all(|x| x.is_finite())),
        holding_torque_bracket_nm: [
            nm(s.holding.and_then(|h| h.bracket_low)),
            nm(s.holding.and_then(|h| h.bracket_high)),
        ],
        holding_after_blow: s.holding.map(|h| h.after_blow),
        holding_slip_count: s.holding.map_or(0, |h| h.slips),
        joint_rate_nm_per_deg: finite(s.holding.and_then(|h| h.joint_rate_nm_per_deg)),
        timing: TimingJson {
            source: a.timing.source.as_str().into(),
            duplicated_frames: a.timing.duplicated_frames,
            interpolated_frames: a.timing.interpolated_frames,
            median_interval_ms: finite(a.timing.median_interval_s.map(|t| t * 1e3)),
            worst_interval_ms: finite(a.timing.worst_interval_s.map(|t| t * 1e3)),
            captured_fps_estimate_hz: finite(a.timing.captured_fps_estimate_hz),
            rolling_shutter_estimate_ms: finite(
                a.timing.rolling_shutter_estimate_s.map(|(t, _)| t * 1e3),
            ),
            rolling_shutter_estimate_ci95_ms: a
                .timing
                .rolling_shutter_estimate_s
                .map(|(_, (lo, hi))| [lo * 1e3, hi * 1e3])
                .filter(|v| v.iter().all(|x| x.is_finite())),
        },
    };
    Report {
        report_version: REPORT_VERSION,
        fps: a.time_base.fps_hz(),
        frames: n,
        warnings: a.warnings.iter().map(ToString::to_string).collect(),
        caution: super::CAUTION.to_string(),
        clip: ClipJson::of(&a.clip.path),
        clip_frames: a.clip.frames,
        fps_source: match a.fps_source {
            FpsSource::Option => "option",
            FpsSource::Rig => "rig",
            FpsSource::Container => "container",
        }
        .to_string(),
        trace,
        blows,
        summary,
        bar: a
            .bar
            .as_ref()
            .and_then(|b| serde_json::to_value(b.to_json()).ok()),
        springback: a
            .springback
            .as_ref()
            .and_then(|v| serde_json::to_value(v).ok()),
        tool: ToolJson::this(),
        created_utc: super::provenance::now_utc(),
        rig: serde_json::to_value(&a.rig).unwrap_or(serde_json::Value::Null),
        window: WindowJson::of(a),
        mark_quality: MarkQualityJson {
            drive: MarkJson::of(&a.trace.drive, &a.trace.drive_confidence, a.signals[0]),
            nut: MarkJson::of(&a.trace.nut, &a.trace.nut_confidence, a.signals[1]),
        },
        model: a.model.as_ref().map(|m| match m {
            Ok(f) => serde_json::to_value(f).unwrap_or(serde_json::Value::Null),
            Err(e) => serde_json::json!({ "error": e }),
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::super::tests::analysis;
    use super::super::write_outputs;
    use serde_json::Value;

    /// Every key the project's interface specification (version 1 and on) lists for
    /// report.json, section "report.json" (documented for users in docs/outputs.md), by object.
    const TOP: [&str; 6] = ["fps", "frames", "warnings", "trace", "blows", "summary"];
    const TRACE: [&str; 4] = ["t_s", "drive_deg", "nut_deg", "twist_deg"];
    const BLOW: [&str; 9] = [
        "index",
        "frame",
        "t_s",
        "drive_advance_deg",
        "nut_advance_deg",
        "peak_twist_deg",
        "peak_torque_nm",
        "residual_twist_deg",
        "nut_lag_ms",
    ];
    const SUMMARY: [&str; 6] = [
        "blow_count",
        "blow_rate_per_min",
        "drive_total_deg",
        "nut_total_deg",
        "bar_stiffness_nm_per_deg",
        "peak_torque_nm",
    ];

    /// Numbers, or null.
    fn is_num_or_null(v: &Value) -> bool {
        v.is_number() || v.is_null()
    }

    fn written(with_bar: bool) -> Value {
        let a = analysis(with_bar);
        let dir = tempfile::tempdir().unwrap();
        write_outputs(&a, dir.path()).unwrap();
        let text = std::fs::read_to_string(dir.path().join("report.json")).unwrap();
        serde_json::from_str(&text).unwrap()
    }

    #[test]
    fn report_json_has_every_interface_key_with_its_type() {
        let v = written(true);
        for k in TOP {
            assert!(v.get(k).is_some(), "top-level key {k} missing");
        }
        assert!(v["fps"].is_number() && v["frames"].is_u64() && v["warnings"].is_array());
        let n = v["frames"].as_u64().unwrap() as usize;
        for k in TRACE {
            let arr = v["trace"][k]
                .as_array()
                .unwrap_or_else(|| panic!("trace.{k}"));
            assert_eq!(arr.len(), n, "trace.{k} has one entry per frame");
            assert!(arr.iter().all(is_num_or_null), "trace.{k}");
        }
        // Angles are 0 at the first analysed frame; twist = drive − nut.
        assert_eq!(v["trace"]["nut_deg"][0].as_f64(), Some(0.0));
        // The test analysis loses the drive on frames 3 and 4: null there, and in twist.
        assert!(v["trace"]["drive_deg"][3].is_null() && v["trace"]["twist_deg"][4].is_null());
        let blows = v["blows"].as_array().unwrap();
        assert_eq!(blows.len(), 10, "fast-tool has 10 blows");
        for b in blows {
            for k in BLOW {
                assert!(b.get(k).is_some_and(is_num_or_null), "blow key {k}");
            }
            let f = b["frame"].as_f64().unwrap();
            let t = b["t_s"].as_f64().unwrap();
            assert!(
                (t - f / v["fps"].as_f64().unwrap()).abs() < 1e-12,
                "t_s = frame/fps"
            );
        }
        for k in SUMMARY {
            assert!(
                v["summary"].get(k).is_some_and(is_num_or_null),
                "summary {k}"
            );
        }
        assert_eq!(v["summary"]["blow_count"].as_u64(), Some(10));
        // Extensions.
        assert_eq!(v["report_version"].as_u64(), Some(1));
        assert!(
            v["caution"]
                .as_str()
                .unwrap()
                .contains("calibrated torque wrench")
        );
        assert_eq!(v["summary"]["stiffness_source"].as_str(), Some("computed"));
        assert_eq!(v["summary"]["bar_rating_nm"].as_f64(), Some(136.0));
    }

    #[test]
    fn every_number_key_carries_a_unit_or_is_a_count() {
        // House rule: unit suffix in every numeric key. Counts, indices, frame numbers,
        // ratios and confidences are dimensionless and named so.
        let dimensionless = [
            "report_version",
            "frames",
            "clip_frames",
            "index",
            "frame",
            "blow_count",
            "nut_advancing_blow_count",
            "nut_stopped_after_blow",
            "holding_after_blow",
            "rise_frames",
            "peak_under_read_ratio",
            "holding_slip_count",
            "nut_onset_frame",
            "peak_torque_to_rating_ratio",
            "drive_confidence",
            "nut_confidence",
            "duplicated_frames",
            "interpolated_frames",
            "lost_fraction",
            "confidence",
            "fps",
            "bytes",
            "first_frame",
            "last_frame",
            "held_blows",
            "decay_fits",
            // The fitted blow model (`model`): an estimate's value and sigma carry the unit of
            // the key above them; ratios, counts and the internal (log-scale) vector.
            "value",
            "sigma",
            "nut_to_drive_inertia_ratio",
            "bar_damping_ratio",
            "pulse_to_half_period_ratio",
            "max_peak_twist_rel_error",
            "frames_used",
            "evaluations",
            "internal",
        ];
        let units = [
            "_s", "_ms", "_deg", "_nm", "_lbf_ft", "_per_min", "_per_deg", "_per_rad", "_ratio",
            "_j", "_hz",
        ];
        fn walk(v: &Value, f: &mut dyn FnMut(&str, &Value)) {
            if let Value::Object(m) = v {
                for (k, x) in m {
                    // The rig as read keeps the rig file's own keys (interface, "Rig file").
                    if k == "rig" {
                        continue;
                    }
                    f(k, x);
                    walk(x, f);
                }
            } else if let Value::Array(a) = v {
                a.iter().for_each(|x| walk(x, f));
            }
        }
        let v = written(true);
        walk(&v, &mut |k, x| {
            let numeric = x.is_number()
                || x.as_array()
                    .is_some_and(|a| a.first().is_some_and(Value::is_number));
            if numeric {
                assert!(
                    dimensionless.contains(&k) || units.iter().any(|u| k.ends_with(u)),
                    "numeric key {k} has no unit"
                );
            }
        });
    }

    #[test]
    fn report_json_carries_its_provenance() {
        // Interface v2, "Provenance": tool, created_utc, clip {path, bytes, sha256}, the rig
        // as read and the analysed window.
        let v = written(true);
        assert_eq!(v["tool"]["name"], "twistmark");
        assert_eq!(v["tool"]["version"], env!("CARGO_PKG_VERSION"));
        let t = v["created_utc"].as_str().unwrap();
        assert!(t.len() == 20 && t.ends_with('Z'), "{t}");
        // The test analysis is held in memory: its path cannot be read, so no size or hash.
        assert_eq!(v["clip"]["path"], "bench/fast-tool");
        assert!(v["clip"]["bytes"].is_null() && v["clip"]["sha256"].is_null());
        assert_eq!(v["rig"]["marks"]["drive"]["kind"], "radial");
        assert!(v["rig"]["bar"]["sections"].is_array());
        let n = v["frames"].as_u64().unwrap();
        assert_eq!(v["window"]["first_frame"].as_u64(), Some(0));
        assert_eq!(v["window"]["last_frame"].as_u64(), Some(n - 1));
    }

    #[test]
    fn without_a_bar_torque_fields_are_null() {
        let v = written(false);
        for b in v["blows"].as_array().unwrap() {
            assert!(b["peak_torque_nm"].is_null() && b["peak_twist_deg"].is_number());
        }
        assert!(v["summary"]["peak_torque_nm"].is_null());
        assert!(v["summary"]["bar_stiffness_nm_per_deg"].is_null());
        let w: Vec<&str> = v["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .filter_map(Value::as_str)
            .collect();
        assert!(w.iter().any(|s| s.contains("no bar")), "{w:?}");
    }
}

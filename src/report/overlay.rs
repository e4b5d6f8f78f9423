//! Overlay frames that show what the tracker measured, so a user can check it by eye.
//!
//! In: an [`Analysis`] and its clip (re-read sequentially; only the wanted frames are kept).
//! Out: `overlays/frame_NNNNNN.png` for chosen moments: the first analysed frame, each blow's
//! peak-twist frame (or every Nth blow), and the first frame of every run where a mark was
//! lost. Each shows every mark's pivot and annulus, the detected stripe direction and the
//! angle as text.
//!
//! Stripe direction on screen (radial marks): ψ = zero_screen + sign × angle, with zero_screen
//! from [`crate::Trace`], sign = +1 for `"tighten": "cw"` and −1 for `"ccw"`, and screen
//! angles from +x towards +y. On an oblique disc (`ellipse`), ψ is the angle on the disc,
//! drawn through the ellipse. Side marks: the stripe is drawn parallel to the bar's axis at
//! offset R·sin(zero_screen + angle) in the rig's tightening direction.
//!
//! Part of the report stage: it reads results through `crate::Analysis` and must never import
//! `batch`, `find_marks`, `calibrate` or the CLI.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use ab_glyph::FontRef;
use image::{Rgb, RgbImage};

use super::draw;
use crate::analyze::Analysis;
use crate::decode::{self, Frame, FrameSource};
use crate::error::{Error, Result};
use crate::rig::{Mark, Role};
use crate::units::Angle;

/// Frames narrower than this are enlarged by a whole factor so the text stays readable.
const MIN_WIDTH_PX: u32 = 640;
/// Largest enlargement factor.
const MAX_SCALE: u32 = 4;

pub(crate) const DRIVE: Rgb<u8> = Rgb([40, 160, 255]);
pub(crate) const NUT: Rgb<u8> = Rgb([255, 140, 0]);
pub(crate) const FIXED: Rgb<u8> = Rgb([60, 200, 90]);
const LOST: Rgb<u8> = Rgb([255, 40, 40]);
const TEXT_BG: Rgb<u8> = Rgb([20, 20, 20]);
const TEXT: Rgb<u8> = Rgb([245, 245, 245]);

/// Which moments get an overlay frame.
#[derive(Debug, Clone, PartialEq)]
pub struct OverlayOptions {
    /// Draw the peak-twist frame of every Nth blow (1 = every blow).
    pub every_nth_blow: usize,
    /// At most this many frames; the first frame, then blow peaks, then lost-mark frames are
    /// kept in that order of priority.
    pub max_frames: usize,
}

impl Default for OverlayOptions {
    fn default() -> Self {
        OverlayOptions {
            every_nth_blow: 1,
            max_frames: 200,
        }
    }
}

/// One chosen moment: a trace sample and why it was chosen.
#[derive(Debug, Clone, PartialEq)]
pub struct Moment {
    /// Sample index into the trace.
    pub sample: usize,
    /// Clip frame index.
    pub frame: u64,
    /// Why this frame was chosen (`first frame`, `blow 3 peak twist`, `nut lost`).
    pub reasons: Vec<String>,
}

/// The moments to draw, in frame order, with their reasons.
pub fn moments(analysis: &Analysis, opts: &OverlayOptions) -> Vec<Moment> {
    let tr = &analysis.trace;
    let n = tr.len();
    let mut wanted: Vec<(usize, String)> = Vec::new();
    if n > 0 {
        wanted.push((0, "first frame".into()));
    }
    let every = opts.every_nth_blow.max(1);
    for (k, b) in analysis.segmentation.blows.iter().enumerate() {
        if k % every != 0 {
            continue;
        }
        let peak = (b.onset..b.end.min(n))
            .filter_map(|i| tr.twist(i).map(|t| (i, t.rad())))
            .max_by(|x, y| x.1.total_cmp(&y.1));
        if let Some((i, _)) = peak {
            wanted.push((i, format!("blow {} peak twist", k + 1)));
        }
    }
    for (role, series) in [("drive", &tr.drive), ("nut", &tr.nut)] {
        for i in 0..series.len().min(n) {
            if series[i].is_none() && (i == 0 || series[i - 1].is_some()) {
                wanted.push((i, format!("{role} lost")));
            }
        }
    }
    let mut by_sample: BTreeMap<usize, Vec<String>> = BTreeMap::new();
    for (i, why) in wanted {
        let full = by_sample.len() >= opts.max_frames && !by_sample.contains_key(&i);
        if !full {
            by_sample.entry(i).or_default().push(why);
        }
    }
    by_sample
        .into_iter()
        .map(|(sample, reasons)| Moment {
            sample,
            frame: tr.frames[sample],
            reasons,
        })
        .collect()
}

/// Re-reads the analysed clip and writes the overlay frames into `dir/overlays/`.
///
/// # Errors
/// [`Error::Input`]/[`Error::Decode`] when the clip cannot be read again, [`Error::Io`] or
/// [`Error::Output`] naming a file that cannot be written.
pub fn write_overlays(
    analysis: &Analysis,
    dir: &Path,
    opts: &OverlayOptions,
) -> Result<Vec<PathBuf>> {
    let source = decode::open(&analysis.clip.path)?;
    write_overlays_from(source, analysis, dir, opts)
}

/// As [`write_overlays`], reading frames from `source` (which must be the analysed clip).
///
/// # Errors
/// As [`write_overlays`].
pub fn write_overlays_from(
    mut source: Box<dyn FrameSource>,
    analysis: &Analysis,
    dir: &Path,
    opts: &OverlayOptions,
) -> Result<Vec<PathBuf>> {
    let moments = moments(analysis, opts);
    let out_dir = dir.join("overlays");
    std::fs::create_dir_all(&out_dir).map_err(|e| Error::io(&out_dir, e))?;
    let font = font()?;
    let mut pending = moments.iter().peekable();
    let mut frame = Frame::empty();
    let mut written = Vec::new();
    while let Some(&m) = pending.peek() {
        if !source.read_into(&mut frame)? {
            return Err(Error::input(
                &analysis.clip.path,
                format!(
                    "the clip ended before frame {} while drawing overlays; was it changed since \
                     the analysis?",
                    m.frame
                ),
            ));
        }
        if frame.index < m.frame {
            continue;
        }
        pending.next();
        if frame.index > m.frame {
            // The source skipped this frame; nothing to draw for it.
            continue;
        }
        let img = draw_overlay(&frame, analysis, m, &font);
        let path = out_dir.join(format!("frame_{:06}.png", m.frame));
        super::save_png_atomic(&img, &path)?;
        written.push(path);
    }
    Ok(written)
}

pub(crate) fn font() -> Result<FontRef<'static>> {
    FontRef::try_from_slice(super::plot::FONT_TTF).map_err(|_| Error::Output {
        path: PathBuf::from("assets/DejaVuSans.ttf"),
        reason: "the embedded overlay font could not be loaded; rebuild from a clean checkout"
            .into(),
    })
}

/// The whole-number enlargement used for a frame of this width.
pub(crate) fn scale_for(width: u32) -> u32 {
    if width == 0 {
        return 1;
    }
    MIN_WIDTH_PX.div_ceil(width).clamp(1, MAX_SCALE)
}

/// The frame as RGB, enlarged by `s` (nearest neighbour).
pub(crate) fn to_rgb(frame: &Frame, s: u32) -> RgbImage {
    let (w, h) = (frame.width, frame.height);
    let mut img = RgbImage::new(w * s, h * s);
    for y in 0..h * s {
        for x in 0..w * s {
            let v = (frame.value(x / s, y / s) * 255.0)
                .round()
                .clamp(0.0, 255.0) as u8;
            img.put_pixel(x, y, Rgb([v, v, v]));
        }
    }
    img
}

/// Maps frame pixel coordinates (origin at the centre of the top-left pixel) to the
/// enlarged image.
#[derive(Debug, Clone, Copy)]
pub(crate) struct View {
    pub(crate) s: f32,
}

impl View {
    pub(crate) fn p(self, x: f64, y: f64) -> (f32, f32) {
        let s = self.s;
        (
            x as f32 * s + (s - 1.0) / 2.0,
            y as f32 * s + (s - 1.0) / 2.0,
        )
    }
}

/// A line a few pixels wide, so it shows on a busy frame.
pub(crate) fn thick_line(
    img: &mut RgbImage,
    a: (f32, f32),
    b: (f32, f32),
    color: Rgb<u8>,
    width: i32,
) {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let len = (dx * dx + dy * dy).sqrt().max(1e-6);
    let (nx, ny) = (-dy / len, dx / len);
    for k in 0..width {
        let o = k as f32 - (width - 1) as f32 / 2.0;
        draw::line(
            img,
            (a.0 + nx * o, a.1 + ny * o),
            (b.0 + nx * o, b.1 + ny * o),
            color,
        );
    }
}

/// A point on a mark's disc at radius `r` and disc angle `psi`, on screen.
pub(crate) fn disc_point(
    pivot: [f64; 2],
    r: f64,
    psi: f64,
    ellipse: Option<&crate::rig::Ellipse>,
) -> (f64, f64) {
    match ellipse {
        None => (pivot[0] + r * psi.cos(), pivot[1] + r * psi.sin()),
        Some(e) => {
            let phi = e.major_deg.to_radians();
            let (u, v) = (r * (psi - phi).cos(), r * e.axis_ratio * (psi - phi).sin());
            (
                pivot[0] + u * phi.cos() - v * phi.sin(),
                pivot[1] + u * phi.sin() + v * phi.cos(),
            )
        }
    }
}

pub(crate) fn label(img: &mut RgbImage, font: &FontRef<'_>, x: i32, y: i32, size: f32, text: &str) {
    let (tw, th) = draw::text_size(font, size, text);
    let pad = 3;
    let x = x.clamp(0, (img.width() as i32 - tw as i32 - 2 * pad).max(0));
    let y = y.clamp(0, (img.height() as i32 - th as i32 - 2 * pad).max(0));
    draw::fill_rect(
        img,
        x,
        y,
        tw + 2 * pad as u32,
        th + 2 * pad as u32 + 2,
        TEXT_BG,
    );
    draw::text(img, font, size, (x + pad, y + pad), TEXT, text);
}

pub(crate) fn draw_overlay(
    frame: &Frame,
    a: &Analysis,
    m: &Moment,
    font: &FontRef<'_>,
) -> RgbImage {
    let s = scale_for(frame.width);
    let mut img = to_rgb(frame, s);
    let view = View { s: s as f32 };
    let tr = &a.trace;
    let i = m.sample;
    let text_px = (img.width() as f32 / 45.0).clamp(14.0, 28.0);
    let line_w = (s as i32).clamp(2, 3);

    for (role, mark) in a.rig.marks() {
        let (angle, zero, color, name) = match role {
            Role::Drive => (
                tr.drive.get(i).copied().flatten(),
                tr.drive_zero_screen,
                DRIVE,
                "drive",
            ),
            Role::Nut => (
                tr.nut.get(i).copied().flatten(),
                tr.nut_zero_screen,
                NUT,
                "nut",
            ),
            Role::Fixed => (None, None, FIXED, "fixed"),
        };
        let lost = role != Role::Fixed && angle.is_none();
        let ring = if lost { LOST } else { color };
        let text = match (role, angle) {
            (Role::Fixed, _) => "fixed".to_string(),
            (_, Some(an)) if zero.is_some() => format!("{name} {:+.2}°", an.deg()),
            (_, Some(an)) => format!("{name} {:+.2}° (direction unknown)", an.deg()),
            (_, None) => format!("{name} LOST"),
        };
        match mark {
            Mark::Radial(rm) => {
                let el = rm.ellipse.as_ref();
                for r in rm.radius {
                    let pts: Vec<(f32, f32)> = (0..=180)
                        .map(|k| {
                            let (x, y) = disc_point(
                                rm.pivot,
                                r,
                                k as f64 * std::f64::consts::TAU / 180.0,
                                el,
                            );
                            view.p(x, y)
                        })
                        .collect();
                    for w in pts.windows(2) {
                        thick_line(&mut img, w[0], w[1], ring, 1.max(line_w - 1));
                    }
                }
                let c = view.p(rm.pivot[0], rm.pivot[1]);
                let arm = 6.0 * view.s;
                thick_line(&mut img, (c.0 - arm, c.1), (c.0 + arm, c.1), ring, line_w);
                thick_line(&mut img, (c.0, c.1 - arm), (c.0, c.1 + arm), ring, line_w);
                if let (Some(an), Some(z)) = (angle, zero) {
                    let sign = rm.tighten.map_or(1.0, |t| t.sign());
                    let psi = screen_angle(z, sign, an);
                    // Thin across the annulus so the paint stays visible, bold outside it.
                    let [r0, r1] = rm.radius;
                    for (a0, a1, w) in [
                        (r0 * 0.4, r0 * 0.95, line_w + 1),
                        (r0, r1, 1),
                        (r1 * 1.03, r1 * 1.3, line_w + 1),
                    ] {
                        let p0 = disc_point(rm.pivot, a0, psi, el);
                        let p1 = disc_point(rm.pivot, a1, psi, el);
                        thick_line(&mut img, view.p(p0.0, p0.1), view.p(p1.0, p1.1), color, w);
                    }
                }
                let (lx, ly) = view.p(rm.pivot[0] - rm.radius[1], rm.pivot[1] - rm.radius[1]);
                label(
                    &mut img,
                    font,
                    lx as i32,
                    ly as i32 - text_px as i32 - 10,
                    text_px,
                    &text,
                );
            }
            Mark::Side(sm) => {
                let [p, q] = sm.axis;
                let (dx, dy) = (q[0] - p[0], q[1] - p[1]);
                let len = (dx * dx + dy * dy).sqrt().max(1e-9);
                let mut n = (-dy / len, dx / len);
                if let Some(t) = sm.tighten {
                    let v = t.vector();
                    if n.0 * v[0] + n.1 * v[1] < 0.0 {
                        n = (-n.0, -n.1);
                    }
                }
                let r = sm.radius_px;
                thick_line(&mut img, view.p(p[0], p[1]), view.p(q[0], q[1]), ring, 1);
                for o in [-r, r] {
                    let a0 = view.p(p[0] + n.0 * o, p[1] + n.1 * o);
                    let a1 = view.p(q[0] + n.0 * o, q[1] + n.1 * o);
                    thick_line(&mut img, a0, a1, ring, line_w);
                }
                if let (Some(an), Some(z)) = (angle, zero) {
                    let off = r * (z + an).rad().sin();
                    let a0 = view.p(p[0] + n.0 * off, p[1] + n.1 * off);
                    let a1 = view.p(q[0] + n.0 * off, q[1] + n.1 * off);
                    thick_line(&mut img, a0, a1, color, 1);
                }
                let (lx, ly) = view.p(p[0].min(q[0]), p[1].min(q[1]) - r);
                label(
                    &mut img,
                    font,
                    lx as i32,
                    ly as i32 - text_px as i32 - 10,
                    text_px,
                    &text,
                );
            }
        }
    }

    let t_s = tr.t_s(i);
    let header = format!(
        "frame {}   t = {:.2} ms   {}",
        m.frame,
        t_s * 1e3,
        m.reasons.join(", ")
    );
    let twist = tr.twist(i).map_or_else(
        || "twist -".to_string(),
        |t| format!("twist {:+.2}°", t.deg()),
    );
    // At the bottom, where it does not hide the marks' labels.
    let bottom = img.height() as i32 - text_px as i32 - 12;
    label(
        &mut img,
        font,
        4,
        bottom,
        text_px,
        &format!("{header}   {twist}"),
    );
    img
}

/// Screen angle of a radial stripe: zero_screen + sign × angle (radians, +x towards +y).
fn screen_angle(zero: Angle, sign: f64, angle: Angle) -> f64 {
    zero.rad() + sign * angle.rad()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::decode::MemorySource;
    use crate::report::plot::tests::sample_analysis;

    /// Renders a grey frame with a dark radial stripe on each disc at the given screen angles.
    fn scene(a: &Analysis, idx: u64, drive_psi: f64, nut_psi: f64) -> Frame {
        let (w, h) = (a.clip.width, a.clip.height);
        let mut data = vec![180u8; (w * h) as usize];
        for (pivot, psi) in [([60.0, 60.0], drive_psi), ([180.0, 60.0], nut_psi)] {
            for k in 0..400 {
                let r = 15.0 + 25.0 * k as f64 / 400.0;
                let (x, y) = (pivot[0] + r * f64::cos(psi), pivot[1] + r * f64::sin(psi));
                let (x, y) = (x.round() as u32, y.round() as u32);
                if x < w && y < h {
                    data[(y * w + x) as usize] = 20;
                }
            }
        }
        Frame::from_u8(idx, w, h, data)
    }

    fn near(img: &RgbImage, x: f32, y: f32, color: Rgb<u8>) -> bool {
        let (cx, cy) = (x.round() as i64, y.round() as i64);
        (-2..=2).any(|dy| {
            (-2..=2).any(|dx| {
                let (px, py) = (cx + dx, cy + dy);
                px >= 0
                    && py >= 0
                    && (px as u32) < img.width()
                    && (py as u32) < img.height()
                    && *img.get_pixel(px as u32, py as u32) == color
            })
        })
    }

    #[test]
    fn moments_cover_first_frame_blow_peaks_and_losses() {
        let a = sample_analysis(Path::new("x.mkv"));
        let m = moments(&a, &OverlayOptions::default());
        let frames: Vec<u64> = m.iter().map(|m| m.frame).collect();
        // First frame, a peak in each of the 5 blows, and the nut lost at frame 130.
        assert_eq!(frames.len(), 7, "{m:?}");
        assert_eq!(m[0].reasons, ["first frame"]);
        assert!(
            m.iter()
                .any(|m| m.frame == 130 && m.reasons == ["nut lost"])
        );
        assert_eq!(
            m.iter()
                .filter(|m| m.reasons.iter().any(|r| r.contains("peak twist")))
                .count(),
            5
        );
        let every2 = moments(
            &a,
            &OverlayOptions {
                every_nth_blow: 2,
                max_frames: 200,
            },
        );
        assert_eq!(every2.len(), 5);
        let capped = moments(
            &a,
            &OverlayOptions {
                every_nth_blow: 1,
                max_frames: 3,
            },
        );
        assert_eq!(capped.len(), 3);
        assert_eq!(capped[0].reasons, ["first frame"]);
    }

    #[test]
    fn stripe_is_drawn_along_zero_plus_signed_angle() {
        let a = sample_analysis(Path::new("x.mkv"));
        let ms = moments(&a, &OverlayOptions::default());
        // Synthetic frames whose stripes sit exactly where the trace says (drive cw from −90°,
        // nut ccw from 30°), so drawn and painted stripes coincide.
        let frames: Vec<Frame> = (0..a.trace.len() as u64)
            .map(|f| {
                let i = f as usize;
                let d = a.trace.drive[i].map_or(0.0, |x| x.rad());
                let n = a.trace.nut[i].map_or(0.0, |x| x.rad());
                scene(&a, f, (-90f64).to_radians() + d, 30f64.to_radians() - n)
            })
            .collect();
        let dir = tempfile::tempdir().unwrap();
        let src = Box::new(MemorySource::new(frames, None));
        let files = write_overlays_from(src, &a, dir.path(), &OverlayOptions::default()).unwrap();
        assert_eq!(files.len(), ms.len());
        let s = scale_for(240) as f32;
        assert_eq!(s, 3.0);
        for (m, f) in ms.iter().zip(&files) {
            let img = image::open(f).unwrap().to_rgb8();
            assert_eq!((img.width(), img.height()), (720, 360));
            let i = m.sample;
            let view = View { s };
            if let Some(d) = a.trace.drive[i] {
                let psi = screen_angle(Angle::from_deg(-90.0), 1.0, d);
                let (x, y) = view.p(60.0 + 30.0 * psi.cos(), 60.0 + 30.0 * psi.sin());
                assert!(near(&img, x, y, DRIVE), "drive stripe at frame {}", m.frame);
                // Not on the opposite side.
                let (x, y) = view.p(60.0 - 30.0 * psi.cos(), 60.0 - 30.0 * psi.sin());
                assert!(
                    !near(&img, x, y, DRIVE),
                    "drive stripe mirrored at frame {}",
                    m.frame
                );
            }
            match a.trace.nut[i] {
                Some(n) => {
                    let psi = screen_angle(Angle::from_deg(30.0), -1.0, n);
                    let (x, y) = view.p(180.0 + 30.0 * psi.cos(), 60.0 + 30.0 * psi.sin());
                    assert!(near(&img, x, y, NUT), "nut stripe at frame {}", m.frame);
                }
                None => {
                    // The nut's annulus is drawn in the "lost" colour.
                    let (x, y) = view.p(180.0 + 40.0, 60.0);
                    assert!(near(&img, x, y, LOST), "lost ring at frame {}", m.frame);
                }
            }
        }
    }

    #[test]
    fn a_short_clip_is_an_error_not_a_panic() {
        let a = sample_analysis(Path::new("x.mkv"));
        let frames: Vec<Frame> = (0..50).map(|f| scene(&a, f, 0.0, 0.0)).collect();
        let dir = tempfile::tempdir().unwrap();
        let src = Box::new(MemorySource::new(frames, None));
        let e = write_overlays_from(src, &a, dir.path(), &OverlayOptions::default())
            .unwrap_err()
            .to_string();
        assert!(e.contains("ended before frame"), "{e}");
    }
}

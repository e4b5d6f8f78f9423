//! Progress bars on stderr (indicatif): frames of each clip and clips of a batch. They are
//! hidden when stderr is not a terminal, so logs and pipes stay clean.
//!
//! Part of the binary's command line: it uses the library through its public API only, and the
//! library must never import it.

use std::collections::HashMap;
use std::io::IsTerminal;
use std::sync::Mutex;

use indicatif::{MultiProgress, ProgressBar, ProgressDrawTarget, ProgressStyle};
use twistmark::batch::BatchEvent;

/// True when progress should be drawn.
fn wanted() -> bool {
    std::io::stderr().is_terminal()
}

fn frame_style() -> ProgressStyle {
    ProgressStyle::with_template("{prefix:>20.bold} [{bar:30}] {pos}/{len} frames {per_sec}")
        .unwrap_or_else(|_| ProgressStyle::default_bar())
        .progress_chars("=> ")
}

fn clip_style() -> ProgressStyle {
    ProgressStyle::with_template("{prefix:>20.bold} [{bar:30}] {pos}/{len} clips, {elapsed}")
        .unwrap_or_else(|_| ProgressStyle::default_bar())
        .progress_chars("=> ")
}

/// Frame progress of one clip (`analyze`).
pub(crate) struct FrameProgress {
    bar: ProgressBar,
}

impl FrameProgress {
    pub(crate) fn new(name: &str) -> Self {
        let bar = if wanted() {
            ProgressBar::with_draw_target(None, ProgressDrawTarget::stderr())
        } else {
            ProgressBar::hidden()
        };
        bar.set_style(frame_style());
        bar.set_prefix(short(name));
        FrameProgress { bar }
    }

    pub(crate) fn update(&self, done: u64, total: u64) {
        if total > 0 && self.bar.length() != Some(total.max(done)) {
            self.bar.set_length(total.max(done));
        }
        self.bar.set_position(done);
    }

    pub(crate) fn finish(&self) {
        self.bar.finish_and_clear();
    }
}

/// Overall and per-clip progress of a batch.
pub(crate) struct BatchProgress {
    multi: MultiProgress,
    overall: ProgressBar,
    clips: Mutex<HashMap<usize, ProgressBar>>,
}

impl BatchProgress {
    pub(crate) fn new() -> Self {
        let target = if wanted() {
            ProgressDrawTarget::stderr()
        } else {
            ProgressDrawTarget::hidden()
        };
        let multi = MultiProgress::with_draw_target(target);
        let overall = multi.add(ProgressBar::new(0));
        overall.set_style(clip_style());
        overall.set_prefix("batch");
        BatchProgress {
            multi,
            overall,
            clips: Mutex::new(HashMap::new()),
        }
    }

    pub(crate) fn event(&self, ev: BatchEvent<'_>) {
        let Ok(mut clips) = self.clips.lock() else {
            return;
        };
        match ev {
            BatchEvent::Found { clips: n } => self.overall.set_length(n as u64),
            BatchEvent::Started { clip, name } => {
                let bar = self.multi.add(ProgressBar::no_length());
                bar.set_style(frame_style());
                bar.set_prefix(short(name));
                clips.insert(clip, bar);
            }
            BatchEvent::Frames { clip, done, total } => {
                if let Some(bar) = clips.get(&clip) {
                    if total > 0 && bar.length() != Some(total.max(done)) {
                        bar.set_length(total.max(done));
                    }
                    bar.set_position(done);
                }
            }
            BatchEvent::Finished { clip, .. } => {
                if let Some(bar) = clips.remove(&clip) {
                    bar.finish_and_clear();
                    self.multi.remove(&bar);
                }
                self.overall.inc(1);
            }
        }
    }

    pub(crate) fn finish(&self) {
        self.overall.finish_and_clear();
        let _ = self.multi.clear();
    }
}

fn short(name: &str) -> String {
    if name.chars().count() <= 20 {
        name.to_string()
    } else {
        let head: String = name.chars().take(19).collect();
        format!("{head}…")
    }
}

//! `--screenshot FILE`: render the window to a PNG once the first result (or the reason there
//! is none) is drawn, then close.

use std::path::PathBuf;
use std::sync::{Arc, Mutex};

/// Outcome of a screenshot, filled in by the screenshot callback.
pub type ScreenshotOutcome = Arc<Mutex<Option<Result<(), String>>>>;

/// Request to render the window to a PNG and close.
pub struct ScreenshotPlan {
    path: PathBuf,
    frames_ready: u32,
    requested: bool,
    started: std::time::Instant,
    /// Outcome, set by the screenshot callback.
    pub done: ScreenshotOutcome,
}

impl ScreenshotPlan {
    /// A screenshot to `path`, not taken yet.
    pub fn new(path: PathBuf) -> Self {
        ScreenshotPlan {
            path,
            frames_ready: 0,
            requested: false,
            started: std::time::Instant::now(),
            done: Arc::new(Mutex::new(None)),
        }
    }

    /// One frame drawn; `ready` when the window shows what it will show (a result or why
    /// there is none, and nothing under way). After a few ready frames the screenshot is
    /// taken; once saved (or after 180 s without a result) the window closes.
    pub fn step(&mut self, ctx: &egui::Context, ready: bool) {
        if self.started.elapsed() > std::time::Duration::from_secs(180) {
            if let Ok(mut d) = self.done.lock() {
                *d = Some(Err("no result to show within 180 s".into()));
            }
            ctx.send_viewport_cmd(egui::ViewportCommand::Close);
            return;
        }
        let finished = self.done.lock().map(|d| d.is_some()).unwrap_or(true);
        if finished {
            ctx.send_viewport_cmd(egui::ViewportCommand::Close);
            return;
        }
        if ready {
            self.frames_ready += 1;
        }
        if self.frames_ready > 5 && !self.requested {
            self.requested = true;
            let path = self.path.clone();
            let done = self.done.clone();
            let repaint = ctx.clone();
            ctx.request_screenshot(move |img| {
                let [w, h] = img.size;
                let result = image::save_buffer(
                    &path,
                    img.as_raw(),
                    w as u32,
                    h as u32,
                    image::ExtendedColorType::Rgba8,
                )
                .map_err(|e| format!("{}: {e}", path.display()));
                if let Ok(mut d) = done.lock() {
                    *d = Some(result);
                }
                repaint.request_repaint();
            });
        }
        ctx.request_repaint();
    }
}

//! A computation on a thread of its own, keyed by what it was asked for, so a view can start it
//! when its inputs change and show the last result meanwhile (the rotor solve, a run's tracking:
//! seconds each, and never in the analysis worker's queue).

use std::sync::Arc;
use std::thread::JoinHandle;

use eframe::egui;

/// The running job and the last result, each with the key it is for.
pub struct Background<T> {
    running: Option<(String, JoinHandle<Result<T, String>>)>,
    /// The key of the last result, and the result.
    pub result: Option<(String, Result<Arc<T>, String>)>,
}

impl<T> Default for Background<T> {
    fn default() -> Self {
        Self {
            running: None,
            result: None,
        }
    }
}

impl<T: Send + 'static> Background<T> {
    /// Takes a finished job's result (asking for a repaint), or asks to be polled again soon.
    pub fn collect(&mut self, ctx: &egui::Context) {
        let Some((key, h)) = self.running.take() else {
            return;
        };
        if h.is_finished() {
            let r = h
                .join()
                .unwrap_or_else(|_| Err("the computation failed unexpectedly".into()));
            self.result = Some((key, r.map(Arc::new)));
            ctx.request_repaint();
        } else {
            self.running = Some((key, h));
            ctx.request_repaint_after(std::time::Duration::from_millis(100));
        }
    }

    /// A job is running.
    pub fn busy(&self) -> bool {
        self.running.is_some()
    }

    /// Whether `key` would start a job: none running and the last result is for another key.
    pub fn wants(&self, key: &str) -> bool {
        self.running.is_none() && self.result.as_ref().map(|r| r.0.as_str()) != Some(key)
    }

    /// Starts `job` for `key` unless a job is running or the last result is for `key`.
    pub fn start_for(
        &mut self,
        key: String,
        name: &str,
        job: impl FnOnce() -> Result<T, String> + Send + 'static,
    ) {
        if !self.wants(&key) {
            return;
        }
        match std::thread::Builder::new().name(name.into()).spawn(job) {
            Ok(h) => self.running = Some((key, h)),
            Err(e) => self.result = Some((key, Err(format!("cannot start: {e}")))),
        }
    }
}

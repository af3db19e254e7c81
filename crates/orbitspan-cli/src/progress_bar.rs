//! Progress on stderr: a redrawn bar when stderr is a terminal, otherwise one
//! plain line per stage (so logs stay readable).

use orbitspan_core::Progress;
use std::io::{IsTerminal, Write};

const BAR_WIDTH: usize = 30;

/// Shows the core's [`Progress`] updates on stderr. Never cancels.
pub struct ProgressBar {
    terminal: bool,
    stage: String,
    /// Last drawn percentage, to redraw only on change.
    percent: Option<u32>,
}

impl ProgressBar {
    /// A bar that draws on stderr if it is a terminal.
    pub fn on_stderr() -> Self {
        ProgressBar { terminal: std::io::stderr().is_terminal(), stage: String::new(), percent: None }
    }

    /// Starts a stage of the command's own ("reading images", "writing files").
    pub fn stage(&mut self, stage: &str) {
        self.update(stage, 0.0);
    }

    /// Clears the bar so that normal output starts on a clean line.
    pub fn finish(&mut self) {
        if self.terminal && self.percent.is_some() {
            let mut err = std::io::stderr().lock();
            let _ = write!(err, "\r\x1b[2K");
            let _ = err.flush();
        }
        self.percent = None;
        self.stage.clear();
    }
}

impl Progress for ProgressBar {
    fn update(&mut self, stage: &str, fraction: f64) -> bool {
        let fraction = if fraction.is_finite() { fraction.clamp(0.0, 1.0) } else { 0.0 };
        let percent = (fraction * 100.0).floor() as u32;
        let new_stage = stage != self.stage;
        if new_stage {
            self.stage = stage.to_string();
        }
        let mut err = std::io::stderr().lock();
        if self.terminal {
            if new_stage || self.percent != Some(percent) {
                let _ = write!(err, "\r\x1b[2K{}", bar_line(stage, fraction));
                let _ = err.flush();
                self.percent = Some(percent);
            }
        } else if new_stage {
            let _ = writeln!(err, "orbitspan: {stage}");
        }
        true
    }
}

/// `stage [##########          ]  50%`.
fn bar_line(stage: &str, fraction: f64) -> String {
    let filled = ((fraction * BAR_WIDTH as f64).round() as usize).min(BAR_WIDTH);
    format!(
        "{stage:<26} [{}{}] {:>3}%",
        "#".repeat(filled),
        " ".repeat(BAR_WIDTH - filled),
        (fraction * 100.0).floor() as u32
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bar_fills_in_proportion() {
        let line = bar_line("fitting frequencies", 0.5);
        assert!(line.ends_with(&format!("[{}{}]  50%", "#".repeat(15), " ".repeat(15))), "{line}");
        assert!(bar_line("x", 1.0).ends_with(&format!("[{}] 100%", "#".repeat(BAR_WIDTH))));
        assert!(bar_line("x", 0.0).ends_with(&format!("[{}]   0%", " ".repeat(BAR_WIDTH))));
    }
}

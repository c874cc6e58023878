//! The command line's [`Progress`]: a bar on a terminal, plain lines in a batch log.
//!
//! When stderr is a terminal each stage draws an indicatif bar. Otherwise (a batch job's log, a
//! pipe) it prints one plain line when a stage starts, one every [`LOG_INTERVAL`] while it runs
//! (done of total, rate, time left; a clock thread prints it even while one long unit of work
//! runs), and its summary when it ends. Notes are printed as they come, prefixed `note:`;
//! items (a map built, say) only in a batch log, where they are all one learns of them.
//!
//! Every long command reports through one [`Reporter`]: `map` (through [`EngineStage`], the
//! engine's own progress), `library`, `curve`, `compare` and `search`.

use crate::progress::Progress;
use std::io::IsTerminal;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

/// Time between two plain progress lines.
pub const LOG_INTERVAL: Duration = Duration::from_secs(5);

/// Reports progress on stderr.
pub struct Reporter {
    terminal: bool,
    start_lines: bool,
    state: Arc<Mutex<Stage>>,
    stop: Arc<AtomicBool>,
}

struct Stage {
    running: bool,
    name: String,
    total: u64,
    done: u64,
    started: Instant,
    last_line: Instant,
    bar: Option<indicatif::ProgressBar>,
}

impl Reporter {
    /// A reporter that draws bars when stderr is a terminal, plain lines otherwise.
    pub fn new() -> Reporter {
        Self::with_terminal(std::io::stderr().is_terminal())
    }

    /// A reporter that draws bars (`true`) or plain lines (`false`).
    pub fn with_terminal(terminal: bool) -> Reporter {
        let state = Arc::new(Mutex::new(Stage {
            running: false,
            name: String::new(),
            total: 0,
            done: 0,
            started: Instant::now(),
            last_line: Instant::now(),
            bar: None,
        }));
        let stop = Arc::new(AtomicBool::new(false));
        if !terminal {
            let (state, stop) = (Arc::clone(&state), Arc::clone(&stop));
            std::thread::spawn(move || {
                while !stop.load(Ordering::Relaxed) {
                    std::thread::sleep(Duration::from_millis(250));
                    let mut s = state.lock().unwrap_or_else(|e| e.into_inner());
                    if s.running && s.last_line.elapsed() >= LOG_INTERVAL {
                        s.last_line = Instant::now();
                        eprintln!("{}", s.line());
                    }
                }
            });
        }
        Reporter {
            terminal,
            start_lines: true,
            state,
            stop,
        }
    }

    /// The same reporter without the line a stage's start prints in a batch log: for a
    /// command whose own closing line says what it did (the periodic lines still come).
    pub fn without_start_lines(mut self) -> Reporter {
        self.start_lines = false;
        self
    }

    fn state(&self) -> std::sync::MutexGuard<'_, Stage> {
        self.state.lock().unwrap_or_else(|e| e.into_inner())
    }
}

impl Drop for Reporter {
    fn drop(&mut self) {
        self.stop.store(true, Ordering::Relaxed);
    }
}

impl Default for Reporter {
    fn default() -> Self {
        Self::new()
    }
}

impl Stage {
    /// `name: done/total (rate/s, about T left), elapsed`.
    fn line(&self) -> String {
        let elapsed = self.started.elapsed().as_secs_f64();
        let rate = self.done as f64 / elapsed.max(1e-9);
        let mut out = format!("{}: {}", self.name, self.done);
        if self.total > 0 {
            out += &format!("/{}", self.total);
        }
        out += &format!(" in {elapsed:.0} s");
        if self.done > 0 {
            out += &format!(" ({rate:.2}/s");
            if self.total > self.done {
                let left = (self.total - self.done) as f64 / rate;
                out += &format!(", about {left:.0} s left");
            }
            out += ")";
        }
        out
    }
}

impl Progress for Reporter {
    fn start(&self, stage: &str, total: u64) {
        let mut s = self.state();
        if let Some(bar) = s.bar.take() {
            bar.finish_and_clear();
        }
        s.running = true;
        s.name = stage.to_string();
        s.total = total;
        s.done = 0;
        s.started = Instant::now();
        s.last_line = Instant::now();
        if self.terminal {
            let bar = progress_bar(stage);
            bar.set_length(total);
            s.bar = Some(bar);
        } else if self.start_lines {
            match total {
                0 => eprintln!("{stage}: started"),
                n => eprintln!("{stage}: started ({n} to do)"),
            }
        }
    }

    fn advance(&self, n: u64) {
        let mut s = self.state();
        s.done += n;
        if let Some(bar) = &s.bar {
            bar.inc(n);
        }
    }

    fn finish(&self, summary: &str) {
        let mut s = self.state();
        s.running = false;
        if let Some(bar) = s.bar.take() {
            bar.finish_and_clear();
        }
        if !summary.is_empty() {
            eprintln!("{summary}");
        }
    }

    fn note(&self, message: &str) {
        let s = self.state();
        match &s.bar {
            Some(bar) => bar.println(format!("note: {message}")),
            None => eprintln!("note: {message}"),
        }
    }

    fn item(&self, message: &str) {
        if !self.terminal {
            let _s = self.state(); // not between the clock thread's lines
            eprintln!("{message}");
        }
    }
}

/// A stage of a [`Reporter`] fed by an engine's progress (its own units of work).
pub struct EngineStage<'a> {
    reporter: &'a Reporter,
    stage: &'a str,
}

impl<'a> EngineStage<'a> {
    /// Reports the engine's work as the stage `stage` of `reporter`.
    pub fn new(reporter: &'a Reporter, stage: &'a str) -> Self {
        EngineStage { reporter, stage }
    }
}

impl crate::engine::Progress for EngineStage<'_> {
    fn start(&self, total: u64) {
        self.reporter.start(self.stage, total);
    }
    fn advance(&self, done: u64) {
        self.reporter.advance(done);
    }
}

/// A progress bar on stderr (hidden when stderr is not a terminal).
fn progress_bar(what: &str) -> indicatif::ProgressBar {
    let bar = indicatif::ProgressBar::new(0);
    bar.set_style(
        indicatif::ProgressStyle::with_template(
            "{msg} [{bar:40}] {percent:>3}% {elapsed_precise} eta {eta}",
        )
        .expect("valid template")
        .progress_chars("=> "),
    );
    bar.set_message(what.to_string());
    bar
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_plain_line_counts_and_estimates() {
        let s = Stage {
            running: true,
            name: "search".into(),
            total: 10,
            done: 4,
            started: Instant::now() - Duration::from_secs(8),
            last_line: Instant::now(),
            bar: None,
        };
        let line = s.line();
        assert!(
            line.starts_with("search: 4/10 in 8 s (0.50/s, about 12 s left)"),
            "{line}"
        );
    }
}

//! Progress on stderr: a bar on a terminal, plain periodic lines otherwise (logs, CI).

use std::io::IsTerminal;
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressStyle};
use optimizer::StepReport;

use crate::study::Study;

/// Seconds between two plain log lines.
const LOG_EVERY: Duration = Duration::from_secs(10);

pub(crate) struct Progress {
    bar: Option<ProgressBar>,
    start: Instant,
    start_evals: u64,
    budget: u64,
    deadline: Option<Instant>,
    last_log: Instant,
    last: Option<(u64, u64, f64, f64, usize)>,
}

fn human(d: Duration) -> String {
    let s = d.as_secs();
    if s >= 3600 {
        format!("{}h{:02}m", s / 3600, (s % 3600) / 60)
    } else if s >= 60 {
        format!("{}m{:02}s", s / 60, s % 60)
    } else {
        format!("{s}s")
    }
}

impl Progress {
    pub(crate) fn new(study: &Study, done: u64, deadline: Option<Instant>) -> Progress {
        let budget = study.optimizer.max_evaluations;
        let bar = if std::io::stderr().is_terminal() {
            let b = ProgressBar::new(budget);
            if let Ok(style) =
                ProgressStyle::with_template("{bar:30} {pos}/{len} evaluations  {msg}")
            {
                b.set_style(style);
            }
            b.set_position(done);
            Some(b)
        } else {
            None
        };
        Progress {
            bar,
            start: Instant::now(),
            start_evals: done,
            budget,
            deadline,
            last_log: Instant::now(),
            last: None,
        }
    }

    fn time_left(&self, evaluations: u64) -> Option<Duration> {
        let done_here = evaluations.saturating_sub(self.start_evals);
        let by_budget = if done_here > 0 {
            let per = self.start.elapsed().as_secs_f64() / done_here as f64;
            Some(Duration::from_secs_f64(
                per * self.budget.saturating_sub(evaluations) as f64,
            ))
        } else {
            None
        };
        let by_clock = self
            .deadline
            .map(|d| d.saturating_duration_since(Instant::now()));
        match (by_budget, by_clock) {
            (Some(a), Some(b)) => Some(a.min(b)),
            (a, b) => a.or(b),
        }
    }

    fn line(
        &self,
        generation: u64,
        evaluations: u64,
        feasible: f64,
        hv: f64,
        front: usize,
    ) -> String {
        let left = self
            .time_left(evaluations)
            .map(|d| format!(", about {} left", human(d)))
            .unwrap_or_default();
        format!(
            "generation {generation}, {evaluations}/{} evaluations, {:.0} % feasible, hypervolume {hv:.4e}, front {front}, {} elapsed{left}",
            self.budget,
            feasible * 100.0,
            human(self.start.elapsed())
        )
    }

    pub(crate) fn update(&mut self, r: &StepReport, front: usize) {
        self.last = Some((
            r.generation,
            r.evaluations,
            r.feasible_share,
            r.hypervolume,
            front,
        ));
        match &self.bar {
            Some(b) => {
                b.set_position(r.evaluations.min(self.budget));
                let left = self
                    .time_left(r.evaluations)
                    .map(|d| format!(", {} left", human(d)))
                    .unwrap_or_default();
                b.set_message(format!(
                    "gen {} | feasible {:.0} % | HV {:.4e} | front {front}{left}",
                    r.generation,
                    r.feasible_share * 100.0,
                    r.hypervolume
                ));
            }
            None => {
                if self.last_log.elapsed() >= LOG_EVERY {
                    self.last_log = Instant::now();
                    eprintln!(
                        "{}",
                        self.line(
                            r.generation,
                            r.evaluations,
                            r.feasible_share,
                            r.hypervolume,
                            front
                        )
                    );
                }
            }
        }
    }

    pub(crate) fn finish(&mut self) {
        if let Some(b) = &self.bar {
            b.finish_and_clear();
        }
        if let Some((g, e, f, h, n)) = self.last {
            eprintln!("{}", self.line(g, e, f, h, n));
        }
    }
}

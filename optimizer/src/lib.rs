//! Generic optimisers for stria: NSGA-II, single-objective search through argmin with
//! scalarisations, designs of experiments, a non-dominated archive and quality indicators.
//!
//! The crate knows nothing of membranes and never prints or touches files. A caller describes
//! its problem through [`Problem`], configures a [`Run`] with [`RunConfig`], and steps it
//! ([`Run::step`]) or runs it to the end ([`Run::run`]); the [`Run`] serialises with serde for
//! checkpoints. One seed fixes a run, whatever the number of rayon threads.
//!
//! ```
//! use optimizer::{problems::{Zdt, ZdtKind}, Algorithm, Nsga2Config, Run, RunConfig};
//! let problem = Zdt { kind: ZdtKind::Zdt1, n: 10 };
//! let config = RunConfig::new(Algorithm::Nsga2(Nsga2Config::default()), 7, 1000);
//! let mut run = Run::new(config, &problem).unwrap();
//! let stop = std::sync::atomic::AtomicBool::new(false);
//! run.run(&problem, |_, _| {}, &stop, None);
//! assert_eq!(run.evaluations(), 1000);
//! assert!(!run.archive().is_empty());
//! ```

#![deny(missing_docs)]
#![deny(clippy::float_cmp)]

pub mod archive;
pub mod doe;
pub mod dominance;
pub mod indicators;
pub mod mcmc;
pub mod nsga2;
pub mod problem;
pub mod problems;
pub mod run;
pub mod sampling;
pub mod scalarised;
pub mod screening;
pub mod sensitivity;
pub mod single;

pub use archive::Archive;
pub use doe::InitialDesign;
pub use indicators::{hypervolume, hypervolume_of, igd, igd_plus};
pub use nsga2::Nsga2Config;
pub use problem::{Evaluated, Outcome, Problem, Variable};
pub use run::{Algorithm, ConfigError, Run, RunConfig, StepReport, StopReason};
pub use scalarised::{Scalarisation, ScalarisedConfig};
pub use screening::ScreeningConfig;
pub use single::{minimize, minimize_from, MinimizeError, Minimum, Solver};

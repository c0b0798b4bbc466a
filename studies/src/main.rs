//! `stria`: the command line of stria. Parses arguments and dispatches to the library; every
//! failure becomes one message on stderr and an exit code (0 ok, 1 runtime failure, 2 bad input,
//! 75 a run paused before its end and resumable: `studies::run::EXIT_PAUSED`).
// The doc comments of the commands are clap's help text, where `[slurm]` names a study-file
// section and `<study file name>` a placeholder, neither a link nor HTML.
#![allow(rustdoc::broken_intra_doc_links, rustdoc::invalid_html_tags)]

use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

use clap::{Parser, Subcommand};
use studies::error::CliError;

/// Design patterned ion-exchange membranes for electrodialysis with a fast reduced-order model
/// and optimisers. A screening model: results guide design and CFD; they do not certify a plant.
#[derive(Parser, Debug)]
#[command(name = "stria", version, about)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Check a study file; print it with every default explicit and the model's warnings at
    /// the variable bounds. Exit 0 valid, 2 invalid.
    Check {
        /// The study file (TOML).
        study: PathBuf,
    },
    /// Evaluate one design: the study's baseline design, changed by --set; or, with --run and
    /// --pick, a design of a run's front.
    Eval {
        /// The study file (TOML).
        #[arg(required_unless_present = "run", conflicts_with = "run")]
        study: Option<PathBuf>,
        /// Change one key, with the study file's key names: --set membranes.pitch_um=80
        #[arg(long = "set", value_name = "SECTION.KEY=VALUE", conflicts_with = "run")]
        sets: Vec<String>,
        /// A run directory: evaluate the design --pick ID of its front with the run's own study.
        #[arg(long, value_name = "DIR", requires = "pick")]
        run: Option<PathBuf>,
        /// Design id from the run's front.csv (with --run).
        #[arg(long, value_name = "ID", requires = "run")]
        pick: Option<u64>,
        /// Print the evaluation as JSON (SI units) instead of the design sheet.
        #[arg(long)]
        json: bool,
        /// Add the profiles along the channel.
        #[arg(long)]
        profile: bool,
        /// Also evaluate N seeded draws of the uncertain ROM constants and give the 5th,
        /// 50th and 95th percentiles of each output.
        #[arg(long, value_name = "N")]
        samples: Option<usize>,
        /// Seed of the draws (default: the study's optimizer.seed).
        #[arg(long, requires = "samples")]
        seed: Option<u64>,
    },
    /// Run the study's optimisation; running again on the same directory resumes. Ctrl-C,
    /// SIGTERM or SIGHUP pause it at the end of the generation. Exit 0 finished, 75 paused
    /// (a stop signal or --hours; resumable), 1 runtime failure, 2 bad input.
    Run {
        /// The study file (TOML).
        study: PathBuf,
        /// Run directory (default: runs/<study file name>).
        #[arg(long)]
        out: Option<PathBuf>,
        /// Worker threads (default: all cores).
        #[arg(long)]
        threads: Option<usize>,
        /// Evaluation budget (overrides optimizer.max_evaluations).
        #[arg(long = "max-evals")]
        max_evals: Option<u64>,
        /// Wall-clock budget of this invocation in hours (overrides optimizer.hours).
        #[arg(long)]
        hours: Option<f64>,
        /// Discard an existing run in the directory and start afresh.
        #[arg(long)]
        fresh: bool,
    },
    /// Figures and a self-contained HTML page for a run directory.
    Report {
        /// The run directory.
        dir: PathBuf,
    },
    /// CFD case cards for chosen designs of a run.
    Handoff {
        /// The run directory.
        dir: PathBuf,
        /// Design id from front.csv (repeat for several).
        #[arg(long = "pick", required = true)]
        picks: Vec<u64>,
        /// Output directory (default: DIR/handoff).
        #[arg(long)]
        out: Option<PathBuf>,
    },
    /// Sobol sensitivity indices of the study's objectives and constrained quantities with
    /// respect to the uncertain ROM constants (and, optionally, the design variables).
    Sensitivity {
        /// The study file (TOML).
        study: PathBuf,
        /// Base samples n (the model is evaluated n (d + 2) times for d parameters).
        #[arg(long, default_value_t = 256)]
        samples: usize,
        /// Seed of the points and the bootstrap (default: the study's optimizer.seed).
        #[arg(long)]
        seed: Option<u64>,
        /// Also vary the study's design variables over their bounds.
        #[arg(long = "design-variables")]
        design_variables: bool,
        /// Output directory (default: runs/<study file name>-sensitivity).
        #[arg(long)]
        out: Option<PathBuf>,
    },
    /// Calibrate ROM constants to current-voltage data.
    Fit {
        /// The data (CSV).
        data: PathBuf,
        /// The study whose design and constants the data belong to.
        #[arg(long)]
        study: PathBuf,
        /// A ROM constant to fit (repeat for several; default: the usual set).
        #[arg(long = "fit", value_name = "KEY")]
        fit: Vec<String>,
        /// Where to write the constants file.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Hold constants the data cannot inform at their priors (and say so) instead of
        /// refusing the fit.
        #[arg(long)]
        allow_weak: bool,
        /// Steps of every walker of the posterior sampler (the first third is burn-in).
        #[arg(long, default_value_t = 1500, value_parser = clap::value_parser!(u64).range(30..=1_000_000))]
        steps: u64,
        /// Seed of the fit's starts and sampler.
        #[arg(long)]
        seed: Option<u64>,
    },
    /// Many studies from one campaign file (a base study and its scenarios), run on this
    /// machine or as a Slurm job array; `status` and `collect` follow them.
    #[command(args_conflicts_with_subcommands = true, subcommand_negates_reqs = true)]
    Campaign {
        /// The campaign file (TOML).
        #[arg(required = true)]
        file: Option<PathBuf>,
        /// The campaign directory (one run directory a scenario).
        #[arg(long, required = true)]
        out: Option<PathBuf>,
        /// Submit a Slurm job array (one task a scenario) instead of running here.
        #[arg(long)]
        slurm: bool,
        /// Write the Slurm script (DIR/slurm/campaign.sbatch) without submitting it.
        #[arg(long = "slurm-script-only")]
        slurm_script_only: bool,
        /// Slurm partition (overrides [slurm] partition).
        #[arg(long)]
        partition: Option<String>,
        /// Slurm account (overrides [slurm] account).
        #[arg(long)]
        account: Option<String>,
        /// Slurm time limit of each task, e.g. 04:00:00 (overrides [slurm] time).
        #[arg(long)]
        time: Option<String>,
        /// Slurm CPUs of each task, also its thread count (overrides [slurm] cpus_per_task).
        #[arg(long = "cpus-per-task")]
        cpus_per_task: Option<usize>,
        /// Scenarios run at once here (overrides [local] parallel).
        #[arg(long)]
        parallel: Option<usize>,
        /// Threads of each scenario run here (overrides [local] threads_per_scenario).
        #[arg(long = "threads-per-scenario")]
        threads_per_scenario: Option<usize>,
        #[command(subcommand)]
        action: Option<CampaignAction>,
    },
    /// Print the reference of every study-file key (Markdown: docs/study-reference.md).
    Keys,
}

/// What `stria campaign` does besides running a campaign file.
#[derive(Subcommand, Debug)]
enum CampaignAction {
    /// Each scenario: done, running, paused, failed or not started.
    Status {
        /// The campaign directory.
        dir: PathBuf,
    },
    /// campaign.csv and campaign.html comparing the scenarios' results.
    Collect {
        /// The campaign directory.
        dir: PathBuf,
    },
}

/// `stria campaign FILE --out DIR`; a stop signal is passed on to the scenarios' runs, which
/// pause at the end of their generation.
fn campaign(opts: studies::campaign::CampaignOptions) -> Result<ExitCode, CliError> {
    let stop = stop_flag();
    let code = studies::campaign::run(&opts, &stop)?;
    Ok(ExitCode::from(code.clamp(0, 255) as u8))
}

fn dispatch(cli: Cli) -> Result<ExitCode, CliError> {
    match cli.command {
        Command::Check { study } => studies::check::run(&study).map(|()| ExitCode::SUCCESS),
        Command::Eval {
            study,
            sets,
            run,
            pick,
            json,
            profile,
            samples,
            seed,
        } => {
            let subject = match (&study, &run, pick) {
                (_, Some(dir), Some(id)) => studies::eval::Subject::Pick { dir, id },
                (Some(path), _, _) => studies::eval::Subject::Study { path, sets: &sets },
                _ => {
                    return Err(CliError::input(
                        "command line",
                        None,
                        "STUDY",
                        "no design to evaluate",
                        "a study file, or --run DIR with --pick ID",
                    ))
                }
            };
            studies::eval::run(subject, json, profile, samples.map(|n| (n, seed)))
                .map(|()| ExitCode::SUCCESS)
        }
        Command::Run {
            study,
            out,
            threads,
            max_evals,
            hours,
            fresh,
        } => studies::run::run(&studies::run::RunOptions {
            study,
            out,
            threads,
            max_evals,
            hours,
            fresh,
            evaluations_csv_cap: None,
            // Installed before the study loads, so a stop signal at any moment is a clean stop.
            stop: Some(stop_flag()),
        })
        .map(|ended| match ended {
            studies::run::Ended::Finished(_) => ExitCode::SUCCESS,
            studies::run::Ended::Paused(_) => ExitCode::from(studies::run::EXIT_PAUSED),
        }),
        Command::Report { dir } => studies::report::run(&dir).map(|()| ExitCode::SUCCESS),
        Command::Handoff { dir, picks, out } => {
            studies::handoff::run(&dir, &picks, out.as_deref()).map(|()| ExitCode::SUCCESS)
        }
        Command::Sensitivity {
            study,
            samples,
            seed,
            design_variables,
            out,
        } => studies::uncertainty::sensitivity::run(
            &studies::uncertainty::sensitivity::SensitivityOptions {
                study,
                samples,
                seed,
                design_variables,
                out,
            },
        )
        .map(|()| ExitCode::SUCCESS),
        Command::Fit {
            data,
            study,
            fit,
            out,
            allow_weak,
            steps,
            seed,
        } => {
            let settings = studies::fit::solve::Settings {
                allow_weak,
                steps: steps as usize,
                seed: seed.unwrap_or(studies::fit::SEED),
                ..Default::default()
            };
            studies::fit::run_with(&data, &study, &fit, out.as_deref(), &settings)
                .map(|()| ExitCode::SUCCESS)
        }
        Command::Campaign {
            file,
            out,
            slurm,
            slurm_script_only,
            partition,
            account,
            time,
            cpus_per_task,
            parallel,
            threads_per_scenario,
            action,
        } => match action {
            Some(CampaignAction::Status { dir }) => {
                studies::campaign::status::run_status(&dir).map(|()| ExitCode::SUCCESS)
            }
            Some(CampaignAction::Collect { dir }) => {
                studies::campaign::status::run_collect(&dir).map(|()| ExitCode::SUCCESS)
            }
            None => campaign(studies::campaign::CampaignOptions {
                file: file.unwrap_or_default(),
                out: out.unwrap_or_default(),
                slurm,
                slurm_script_only,
                partition,
                account,
                time,
                cpus_per_task,
                parallel,
                threads_per_scenario,
            }),
        },
        Command::Keys => {
            print!("{}", studies::study::keys::reference_markdown());
            Ok(ExitCode::SUCCESS)
        }
    }
}

/// Install the stop handler: Ctrl-C (SIGINT), SIGTERM (Slurm, systemd and container runtimes
/// send it before killing) and SIGHUP (a closed terminal) raise the returned flag, and the run
/// stops at the end of its generation, resumable. A second signal leaves at once (exit 130);
/// every file is still whole (atomic writes), and a resume cuts the rows of the unfinished
/// generation.
fn stop_flag() -> Arc<AtomicBool> {
    let stop = Arc::new(AtomicBool::new(false));
    let flag = Arc::clone(&stop);
    let _ = ctrlc::set_handler(move || {
        if flag.swap(true, Ordering::SeqCst) {
            std::process::exit(130);
        }
        eprintln!(
            "\nstopping at the end of this generation (a second Ctrl-C or SIGTERM leaves at once)"
        );
    });
    stop
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            // clap: help and version exit 0, usage errors exit 2.
            let _ = e.print();
            return ExitCode::from(e.exit_code().clamp(0, 255) as u8);
        }
    };
    match dispatch(cli) {
        Ok(code) => code,
        Err(e) => {
            eprintln!("{e}");
            ExitCode::from(e.exit_code())
        }
    }
}

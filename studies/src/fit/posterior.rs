//! The posterior a constants file carries: its `[posterior]` section (format
//! [`POSTERIOR_FORMAT`], docs/formats.md#constants-file), written by `stria fit` and read by
//! [`load`] or, with the rest of the file, by a study (`[rom] constants_file`).
//!
//! The uncertainty of a study's results draws its constants from here: [`load`] gives the
//! fitted keys, their mean, covariance and samples; [`Posterior::constants_at`] puts one
//! sample into a set of constants. Keys in `held_at_prior` were not informed by the data
//! (`stria fit --allow-weak`): their uncertainty is still their prior.

use std::path::Path;

use model::RomConstants;
use serde::{Deserialize, Serialize};

use super::solve::{self, FitResult, Sampled};
use crate::error::CliError;

/// Version of the `[posterior]` section's layout; raise it when a field changes meaning.
pub const POSTERIOR_FORMAT: u32 = 1;

/// The posterior of the fitted ROM constants.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Posterior {
    /// Layout version ([`POSTERIOR_FORMAT`]).
    pub format: u32,
    /// How the samples were drawn.
    pub method: String,
    /// The fitted constants (`[rom]` keys), the order of every vector below.
    pub names: Vec<String>,
    /// Posterior mean (the values in `[rom]`).
    pub mean: Vec<f64>,
    /// Posterior covariance.
    pub covariance: Vec<Vec<f64>>,
    /// Posterior mode (maximum a posteriori).
    pub mode: Vec<f64>,
    /// Covariance of the Laplace approximation at the mode.
    pub laplace_covariance: Vec<Vec<f64>>,
    /// Central 95 % interval of each constant, [2.5th, 97.5th percentile].
    pub interval_95: Vec<[f64; 2]>,
    /// Constants the data could not inform, held at their priors (`--allow-weak`).
    pub held_at_prior: Vec<String>,
    /// Walkers of the sampler.
    pub walkers: usize,
    /// Steps per walker, burn-in included.
    pub steps: usize,
    /// Burn-in steps discarded.
    pub burn_in: usize,
    /// Seed of the sampler.
    pub seed: u64,
    /// Share of proposals accepted.
    pub acceptance: f64,
    /// Integrated autocorrelation time of each constant, steps (-1: not estimable).
    pub autocorrelation_steps: Vec<f64>,
    /// Draws of the posterior (rows, in the order of `names`), evenly thinned.
    pub samples: Vec<Vec<f64>>,
}

impl Posterior {
    /// The posterior of a fit.
    pub fn of(s: &Sampled, r: &FitResult) -> Posterior {
        Posterior {
            format: POSTERIOR_FORMAT,
            method: "affine-invariant ensemble MCMC (Goodman and Weare 2010)".into(),
            names: r.parameters.iter().map(|(k, _, _)| k.clone()).collect(),
            mean: s.mean.clone(),
            covariance: s.covariance.clone(),
            mode: r.mode.clone(),
            laplace_covariance: r.laplace_covariance.clone(),
            interval_95: s.interval_95.iter().map(|(a, b)| [*a, *b]).collect(),
            held_at_prior: r.held_at_prior.iter().map(|w| w.key.clone()).collect(),
            walkers: s.walkers,
            steps: s.steps,
            burn_in: s.burn_in,
            seed: s.seed,
            acceptance: s.acceptance,
            autocorrelation_steps: s
                .autocorrelation_steps
                .iter()
                .map(|t| if t.is_finite() { *t } else { -1.0 })
                .collect(),
            samples: s.samples.clone(),
        }
    }

    /// `base` with the fitted constants at sample `i` (`None` past the last sample or when the
    /// sample is not an admissible set).
    pub fn constants_at(&self, base: &RomConstants, i: usize) -> Option<RomConstants> {
        let row = self.samples.get(i)?;
        let mut c = *base;
        for (k, v) in self.names.iter().zip(row) {
            c = solve::set(&c, k, *v)?;
        }
        c.validate().ok().map(|()| c)
    }

    /// Standard deviation of each fitted constant.
    pub fn sigma(&self) -> Vec<f64> {
        (0..self.names.len())
            .map(|j| self.covariance[j][j].max(0.0).sqrt())
            .collect()
    }

    /// Check the section's shape: lengths agree, numbers finite, keys fittable.
    fn check(&self) -> Result<(), String> {
        if self.format != POSTERIOR_FORMAT {
            return Err(format!(
                "format {} is not understood by this stria (it reads format {POSTERIOR_FORMAT})",
                self.format
            ));
        }
        let p = self.names.len();
        if p == 0 {
            return Err("`names` is empty".into());
        }
        for k in &self.names {
            if !solve::FITTABLE.contains(&k.as_str()) {
                return Err(format!("`{k}` in `names` is not a fittable constant"));
            }
        }
        let square = |m: &[Vec<f64>]| m.len() == p && m.iter().all(|r| r.len() == p);
        if self.mean.len() != p
            || self.mode.len() != p
            || self.interval_95.len() != p
            || self.autocorrelation_steps.len() != p
            || !square(&self.covariance)
            || !square(&self.laplace_covariance)
        {
            return Err(format!(
                "`mean`, `mode`, `interval_95`, `autocorrelation_steps` need {p} entries and \
                 the covariances {p} x {p} (one per name)"
            ));
        }
        if let Some(i) = self.samples.iter().position(|r| r.len() != p) {
            return Err(format!(
                "sample {} has {} values, not {p}",
                i + 1,
                self.samples[i].len()
            ));
        }
        if self.samples.is_empty() {
            return Err("no samples".into());
        }
        let finite = self
            .mean
            .iter()
            .chain(self.covariance.iter().flatten())
            .chain(self.samples.iter().flatten())
            .all(|x| x.is_finite());
        if !finite {
            return Err("a value is not a finite number".into());
        }
        Ok(())
    }
}

/// The `[posterior]` section: the scalars and short vectors first, then one sample per line.
pub fn to_toml(p: &Posterior) -> String {
    let list = |v: &[f64]| {
        v.iter()
            .map(|x| format!("{x:?}"))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let matrix = |m: &[Vec<f64>]| {
        m.iter()
            .map(|r| format!("    [{}],\n", list(r)))
            .collect::<String>()
    };
    let strings = |v: &[String]| {
        v.iter()
            .map(|s| format!("{s:?}"))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let mut out = format!(
        "# The posterior of the fitted constants (docs/formats.md#constants-file); the values in\n\
         # [rom] above are its mean. One sample per line under `samples`.\n\
         [posterior]\n\
         format = {}\n\
         method = {:?}\n\
         names = [{}]\n\
         mean = [{}]\n\
         mode = [{}]\n\
         interval_95 = [{}]\n\
         held_at_prior = [{}]\n\
         walkers = {}\n\
         steps = {}\n\
         burn_in = {}\n\
         seed = {}\n\
         acceptance = {:?}\n\
         autocorrelation_steps = [{}]\n\
         covariance = [\n{}]\n\
         laplace_covariance = [\n{}]\n\
         samples = [\n",
        p.format,
        p.method,
        strings(&p.names),
        list(&p.mean),
        list(&p.mode),
        p.interval_95
            .iter()
            .map(|[a, b]| format!("[{a:?}, {b:?}]"))
            .collect::<Vec<_>>()
            .join(", "),
        strings(&p.held_at_prior),
        p.walkers,
        p.steps,
        p.burn_in,
        p.seed,
        p.acceptance,
        list(&p.autocorrelation_steps),
        matrix(&p.covariance),
        matrix(&p.laplace_covariance),
    );
    out.push_str(&matrix(&p.samples));
    out.push_str("]\n");
    out
}

/// The `[posterior]` section of a constants file's text, if it has one; errors name the
/// file, the line and the field.
pub fn parse(path: &Path, text: &str) -> Result<Option<Posterior>, CliError> {
    #[derive(Deserialize)]
    struct File {
        posterior: Option<toml::Value>,
    }
    let file: File = toml::from_str(text).map_err(|e| {
        CliError::input(
            path,
            e.span().map(|s| line_of(text, s.start)),
            "(syntax)",
            e.message().to_string(),
            "TOML syntax",
        )
    })?;
    let Some(section) = file.posterior else {
        return Ok(None);
    };
    let line = text
        .lines()
        .position(|l| l.trim() == "[posterior]")
        .map(|i| i + 1);
    let p: Posterior = section.try_into().map_err(|e: toml::de::Error| {
        CliError::input(
            path,
            line,
            "posterior",
            e.message().to_string(),
            "the [posterior] section `stria fit` writes (docs/formats.md#constants-file)",
        )
    })?;
    p.check().map_err(|m| {
        CliError::input(
            path,
            line,
            "posterior",
            m,
            "the [posterior] section `stria fit` writes (docs/formats.md#constants-file)",
        )
    })?;
    Ok(Some(p))
}

fn line_of(text: &str, byte: usize) -> usize {
    text[..byte.min(text.len())].matches('\n').count() + 1
}

/// The posterior of a constants file written by `stria fit` (bad input and a file without a
/// posterior are `CliError::Input`, exit 2).
pub fn load(path: &Path) -> Result<Posterior, CliError> {
    let text = crate::fsio::read_input(path, crate::fsio::CONSTANTS_FILE_MAX_BYTES)
        .map_err(|e| crate::error::io_error("read", path, e))?;
    parse(path, &text)?.ok_or_else(|| {
        CliError::input(
            path,
            None,
            "posterior",
            "the constants file has no [posterior] section (written by hand, or by a stria \
             fit before posteriors)",
            "a constants file written by `stria fit`",
        )
    })
}

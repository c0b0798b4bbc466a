//! The project's documentation stays true to the code: every `docs/*.md` file (with its
//! section anchor) cited in a `.rs` or `.md` file exists, and the generated part of
//! docs/constants.md equals what the model's tables give. Regenerate it with
//! `STRIA_BLESS=1 cargo test -p acceptance --lib constants`.

use std::path::{Path, PathBuf};

use model::constants::{provenance, rom_meaning, Distribution, RomConstants, PHYSICAL};
use model::properties::ionic_data;
use model::validity;
use model::Salt;

fn root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..")
}

/// Every `.rs` and `.md` file of the repository, outside build output and hidden folders.
fn sources(dir: &Path, out: &mut Vec<PathBuf>) {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    let mut entries: Vec<_> = entries.filter_map(Result::ok).map(|e| e.path()).collect();
    entries.sort();
    for p in entries {
        let name = p.file_name().and_then(|n| n.to_str()).unwrap_or_default();
        if name.starts_with('.') || name == "target" || name == "runs" {
            continue;
        }
        if p.is_dir() {
            sources(&p, out);
        } else if name.ends_with(".rs") || name.ends_with(".md") {
            out.push(p);
        }
    }
}

/// GitHub's anchor of a Markdown heading: lower case, punctuation dropped, spaces to hyphens.
fn slug(heading: &str) -> String {
    heading
        .trim()
        .to_lowercase()
        .chars()
        .filter_map(|c| match c {
            ' ' => Some('-'),
            c if c.is_alphanumeric() || c == '-' || c == '_' => Some(c),
            _ => None,
        })
        .collect()
}

/// The anchors of a Markdown file's headings.
fn anchors(text: &str) -> Vec<String> {
    text.lines()
        .filter(|l| l.starts_with('#'))
        .map(|l| slug(l.trim_start_matches('#')))
        .collect()
}

/// The citations of `docs/<name>.md` (with an optional `#anchor`) in a text. Relative links
/// inside docs/ (`(physics.md#validity)`) count too.
fn citations(text: &str, in_docs: bool) -> Vec<(String, Option<String>)> {
    let mut out = Vec::new();
    let bytes = text.as_bytes();
    let word = |c: u8| c.is_ascii_alphanumeric() || c == b'-' || c == b'_';
    let mut i = 0;
    while let Some(pos) = text[i..].find(".md") {
        let end = i + pos + 3;
        let mut start = i + pos;
        while start > 0 && (word(bytes[start - 1]) || bytes[start - 1] == b'/') {
            start -= 1;
        }
        let path = &text[start..end];
        let name = if let Some(rest) = path.strip_prefix("docs/") {
            Some(rest)
        } else if in_docs && !path.contains('/') && start > 0 && bytes[start - 1] == b'(' {
            Some(path)
        } else {
            None
        };
        if let Some(name) = name {
            let mut anchor = None;
            if text[end..].starts_with('#') {
                let a: String = text[end + 1..]
                    .chars()
                    .take_while(|c| c.is_ascii_alphanumeric() || *c == '-' || *c == '_')
                    .collect();
                anchor = Some(a);
            }
            out.push((name.to_string(), anchor));
        }
        i = end;
    }
    out
}

#[test]
fn every_cited_docs_file_and_section_exists() {
    let root = root();
    let mut files = Vec::new();
    sources(&root, &mut files);
    let mut broken = Vec::new();
    let mut seen = 0;
    for f in &files {
        let text = std::fs::read_to_string(f).unwrap_or_default();
        let in_docs = f.parent().and_then(|p| p.file_name()) == Some("docs".as_ref());
        for (name, anchor) in citations(&text, in_docs) {
            seen += 1;
            let target = root.join("docs").join(&name);
            let rel = f.strip_prefix(&root).unwrap_or(f).display().to_string();
            let Ok(doc) = std::fs::read_to_string(&target) else {
                broken.push(format!("{rel}: docs/{name} does not exist"));
                continue;
            };
            if let Some(a) = anchor {
                if !anchors(&doc).contains(&a) {
                    broken.push(format!("{rel}: docs/{name} has no section #{a}"));
                }
            }
        }
    }
    assert!(seen > 10, "found only {seen} citations: the scan is broken");
    assert!(
        broken.is_empty(),
        "dangling citations:\n{}",
        broken.join("\n")
    );
}

/// Every `name.md` mentioned in a text, with the path characters before it.
fn md_mentions(text: &str) -> Vec<String> {
    let bytes = text.as_bytes();
    let path_char = |c: u8| c.is_ascii_alphanumeric() || b"-_./".contains(&c);
    let mut out = Vec::new();
    let mut i = 0;
    while let Some(pos) = text[i..].find(".md") {
        let end = i + pos + 3;
        let after_ok = bytes.get(end).is_none_or(|c| !c.is_ascii_alphanumeric());
        let mut start = i + pos;
        while start > 0 && path_char(bytes[start - 1]) {
            start -= 1;
        }
        if after_ok && start < i + pos {
            out.push(text[start..end].trim_start_matches('.').to_string());
        }
        i = end;
    }
    out
}

#[test]
fn every_mentioned_markdown_file_is_in_the_repository() {
    // A citation of a document outside the repository (or of one never written) cannot be
    // followed by a reader of the repository: every `x.md` named in a source or document
    // must be a file of the repository (matched by its path's end).
    let root = root();
    let mut files = Vec::new();
    sources(&root, &mut files);
    let docs: Vec<String> = files
        .iter()
        .filter(|f| f.extension().is_some_and(|e| e == "md"))
        .map(|f| f.strip_prefix(&root).unwrap_or(f).display().to_string())
        .collect();
    let mut missing = Vec::new();
    for f in &files {
        if f.ends_with("tests/src/docs.rs") {
            continue;
        }
        let text = std::fs::read_to_string(f).unwrap_or_default();
        for m in md_mentions(&text) {
            let m = m.trim_start_matches('/');
            let outside = m.contains("shared/");
            if outside || !docs.iter().any(|d| d == m || d.ends_with(&format!("/{m}"))) {
                let rel = f.strip_prefix(&root).unwrap_or(f).display().to_string();
                missing.push(format!("{rel}: {m}"));
            }
        }
    }
    assert!(
        missing.is_empty(),
        "documents named but not in the repository:\n{}",
        missing.join("\n")
    );
}

#[test]
fn citation_scan_finds_paths_and_anchors() {
    let c = citations(
        "see docs/physics.md#funnelling and `docs/formats.md`.",
        false,
    );
    assert_eq!(
        c,
        vec![
            ("physics.md".to_string(), Some("funnelling".to_string())),
            ("formats.md".to_string(), None)
        ]
    );
    assert!(citations("model.md and ../outside/x.md", false).is_empty());
    assert_eq!(citations("[a](references.md#water)", true).len(), 1);
    assert_eq!(slug(" Cell-pair balance"), "cell-pair-balance");
    assert_eq!(
        md_mentions("see ../docs/a.md, model.md and x.mdx"),
        vec!["/docs/a.md", "model.md"]
    );
    assert_eq!(
        slug(" Checkpoint (checkpoint.json)"),
        "checkpoint-checkpointjson"
    );
}

/// A number as the tables show it: exactly when short, else to four significant digits.
fn shown(v: f64) -> String {
    let plain = if v != 0.0 && (v.abs() < 1e-3 || v.abs() >= 1e6) {
        format!("{v:e}")
    } else {
        format!("{v}")
    };
    if plain.len() <= 12 {
        return plain;
    }
    let digits = 3 - v.abs().log10().floor() as i32;
    if (0..=12).contains(&digits) {
        let s = format!("{v:.*}", digits as usize);
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        format!("{v:.3e}")
    }
}

/// The admissible range of a ROM constant in words (`RomConstants::validate` with the
/// constant at -1, below every lower end).
fn admissible(key: &str) -> String {
    let mut json = serde_json::to_value(RomConstants::default()).unwrap();
    json[key] = serde_json::json!(-1.0);
    let k: RomConstants = serde_json::from_value(json).unwrap();
    match k.validate() {
        Err(model::ModelError::Input { allowed, .. }) => allowed.to_string(),
        _ => "any".to_string(),
    }
}

/// The generated part of docs/constants.md.
fn constants_markdown() -> String {
    let mut s = String::new();
    s.push_str("## Physical constants\n\n| symbol | value | unit | source |\n|---|---|---|---|\n");
    for r in PHYSICAL {
        s.push_str(&format!(
            "| {} | {} | {} | {} |\n",
            r.symbol,
            shown(r.value),
            r.unit,
            r.source
        ));
    }
    s.push_str(
        "\n## ROM constants\n\nKeys of a study's `[rom]` section and of a constants file. \
         Unit \"V_T\" is thermal voltages (RT/F). The relations are in \
         [physics.md](physics.md#interface-law).\n\n\
         | symbol | key | default | unit | meaning | admissible | source |\n\
         |---|---|---|---|---|---|---|\n",
    );
    for r in provenance() {
        let (unit, meaning) = rom_meaning(r.key).unwrap_or(("", ""));
        s.push_str(&format!(
            "| {} | `{}` | {} | {} | {} | {} | {} |\n",
            r.symbol,
            r.key,
            shown(r.value),
            unit,
            meaning,
            admissible(r.key),
            r.source
        ));
    }
    s.push_str(
        "\n## Priors of the ROM constants\n\nWhat an uncertainty or sensitivity study draws each \
         uncertain ROM constant from (`model::constants::priors()`), centred on its default \
         (arithmetic centre of a uniform prior, geometric centre of a log-uniform one, mean of a \
         normal, which is truncated to the range shown). The default's source is in the table \
         above.\n\n\
         | key | prior | source of the range |\n|---|---|---|\n",
    );
    let priors = model::constants::priors();
    for r in provenance() {
        let (prior, why) = match priors.iter().find(|p| p.key == r.key) {
            Some(p) => (
                match p.distribution {
                    Distribution::Uniform { lower, upper } => {
                        format!("uniform, {} to {}", shown(lower), shown(upper))
                    }
                    Distribution::LogUniform { lower, upper } => {
                        format!("log-uniform, {} to {}", shown(lower), shown(upper))
                    }
                    Distribution::Normal {
                        mean,
                        sd,
                        lower,
                        upper,
                    } => format!(
                        "normal, mean {} sd {}, {} to {}",
                        shown(mean),
                        shown(sd),
                        shown(lower),
                        shown(upper)
                    ),
                },
                p.range_source,
            ),
            None => (
                "none".to_string(),
                model::constants::WITHOUT_PRIOR
                    .iter()
                    .find(|(k, _)| *k == r.key)
                    .map(|(_, why)| *why)
                    .unwrap_or(""),
            ),
        };
        s.push_str(&format!("| `{}` | {} | {} |\n", r.key, prior, why));
    }
    s.push_str(
        "\n## Salt data\n\nAt 25 C, infinite dilution (`model::properties::ionic_data`); \
         sources in [physics.md](physics.md#electrolyte-properties).\n\n\
         | salt | D+ (m^2/s) | D- (m^2/s) | Lambda+ (S m^2/mol) | Lambda- (S m^2/mol) | ion size (m) | molar mass (kg/mol) | molar volume (m^3/mol) |\n\
         |---|---|---|---|---|---|---|---|\n",
    );
    for salt in [Salt::NaCl, Salt::KCl] {
        let d = ionic_data(salt);
        s.push_str(&format!(
            "| {} | {} | {} | {} | {} | {} | {} | {} |\n",
            salt.name(),
            shown(d.cation_diffusivity_m2_s),
            shown(d.anion_diffusivity_m2_s),
            shown(d.cation_limiting_conductivity),
            shown(d.anion_limiting_conductivity),
            shown(d.ion_size_m),
            shown(d.molar_mass_kg_mol),
            shown(d.apparent_molar_volume_m3_mol),
        ));
    }
    s.push_str(
        "\n## Validity bounds\n\n`model::validity`; what each bound guards is in \
         [physics.md](physics.md#validity).\n\n| constant | value |\n|---|---|\n",
    );
    let pair = |p: (f64, f64)| format!("{} to {}", shown(p.0), shown(p.1));
    for (name, value) in [
        ("RE_LAMINAR_MAX", shown(validity::RE_LAMINAR_MAX)),
        ("RE_SPACER_RANGE", pair(validity::RE_SPACER_RANGE)),
        (
            "PITCH_MANUFACTURABLE_MIN_M",
            shown(validity::PITCH_MANUFACTURABLE_MIN_M),
        ),
        ("PITCH_DEBYE_MIN", shown(validity::PITCH_DEBYE_MIN)),
        ("OPEN_FRACTION_MIN", shown(validity::OPEN_FRACTION_MIN)),
        ("OPEN_FRACTION_MAX", shown(validity::OPEN_FRACTION_MAX)),
        ("SALINITY_RANGE (mol/m^3)", pair(validity::SALINITY_RANGE)),
        (
            "OUTLET_RESISTIVE_MIN (mol/m^3)",
            shown(validity::OUTLET_RESISTIVE_MIN),
        ),
        ("TEMPERATURE_RANGE_K", pair(validity::TEMPERATURE_RANGE_K)),
        ("FEED_MIN_MOL_M3", shown(validity::FEED_MIN_MOL_M3)),
        ("FEED_MAX_MOL_M3", shown(validity::FEED_MAX_MOL_M3)),
        ("TRANSPORT_MARGIN", shown(validity::TRANSPORT_MARGIN)),
        ("PRICE_MAX", shown(validity::PRICE_MAX)),
    ] {
        s.push_str(&format!("| `{name}` | {value} |\n"));
    }
    s
}

const MARK: &str = "<!-- generated below: do not edit by hand -->\n";

#[test]
fn constants_doc_matches_the_model_tables() {
    let path = root().join("docs/constants.md");
    let text = std::fs::read_to_string(&path).unwrap();
    let head = text
        .split_once(MARK)
        .map(|(h, _)| h.to_string())
        .expect("docs/constants.md lost its generated-part marker");
    let want = format!("{head}{MARK}\n{}", constants_markdown());
    if std::env::var_os("STRIA_BLESS").is_some() {
        std::fs::write(&path, &want).unwrap();
        return;
    }
    assert!(
        text == want,
        "docs/constants.md is out of date: run `STRIA_BLESS=1 cargo test -p acceptance --lib constants`"
    );
}

#[test]
fn numbers_are_shown_without_false_precision() {
    assert_eq!(shown(2.0 / 3.0), "0.6667");
    assert_eq!(shown(20.0), "20");
    assert_eq!(shown(1.334e-9), "1.334e-9");
    assert_eq!(shown(96_485.332_12), "96485.33212");
}

#[test]
fn formats_doc_states_the_current_versions() {
    // docs/formats.md names each layout's version number; it must be the one in the code.
    let text = std::fs::read_to_string(root().join("docs/formats.md")).unwrap();
    for (name, value) in [
        (
            "CHECKPOINT_VERSION",
            studies::run::files::CHECKPOINT_VERSION,
        ),
        ("STATE_VERSION", optimizer::run::STATE_VERSION),
        ("SCHEMA_VERSION", studies::handoff::case::SCHEMA_VERSION),
        ("CAMPAIGN_FORMAT", studies::campaign::CAMPAIGN_FORMAT),
    ] {
        let stated = text
            .split(&format!("`{name}`, now "))
            .nth(1)
            .and_then(|rest| rest.split(|c: char| !c.is_ascii_digit()).next())
            .and_then(|n| n.parse::<u32>().ok());
        assert_eq!(
            stated,
            Some(value),
            "docs/formats.md must say \"`{name}`, now {value}\""
        );
    }
}

#[test]
fn tests_named_in_the_check_values_exist() {
    // docs/references.md points each check value to the test that holds it, as
    // `module::test_name`: each named function (or module) must still exist.
    let root = root();
    let text = std::fs::read_to_string(root.join("docs/references.md")).unwrap();
    let mut files = Vec::new();
    sources(&root, &mut files);
    let rust: Vec<(String, String)> = files
        .iter()
        .filter(|f| f.extension().is_some_and(|e| e == "rs"))
        .map(|f| {
            let stem = f
                .file_stem()
                .unwrap_or_default()
                .to_string_lossy()
                .to_string();
            (stem, std::fs::read_to_string(f).unwrap_or_default())
        })
        .collect();
    let mut missing = Vec::new();
    let mut named = 0;
    for span in text.split('`').skip(1).step_by(2) {
        let ident = |c: char| c.is_ascii_alphanumeric() || "_./".contains(c);
        if !span.contains("::") || !span.replace("::", "").chars().all(ident) {
            continue;
        }
        let name = span.rsplit("::").next().unwrap_or_default();
        named += 1;
        let found = rust
            .iter()
            .any(|(stem, body)| stem == name || body.contains(&format!("fn {name}(")));
        if !found {
            missing.push(span.to_string());
        }
    }
    assert!(
        named > 20,
        "found only {named} test names: the scan is broken"
    );
    assert!(
        missing.is_empty(),
        "docs/references.md names tests that do not exist: {missing:?}"
    );
}

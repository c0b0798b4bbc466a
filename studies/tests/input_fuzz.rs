//! Randomised bad input: mutated demo studies, random `--set` options, random fit data and
//! constants files. Whatever the input, the library must not panic, and every rejection must
//! be one `CliError::Input` naming the field, what was wrong and what is allowed, with the line
//! wherever the parser can see one (the project's input standard, docs and RULES).
//!
//! Everything runs in-process with a fixed proptest seed and no failure-persistence files; the
//! last test spawns the binary on a few shapes found here to confirm exit code 2 and no panic.
#![allow(clippy::float_cmp)] // values read back from the literals they were written as

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

use proptest::prelude::*;
use proptest::sample::Index;
use proptest::test_runner::{Config, RngAlgorithm, RngSeed};

use studies::error::CliError;
use studies::fit::data;
use studies::study::keys::{self, KEYS, SECTIONS};
use studies::study::raw::{Origin, RawStudy};
use studies::study::Study;

// ---------------------------------------------------------------------------------------------
// Set-up

/// Fixed seed, no persistence files, modest case counts (the whole file is meant to take well
/// under half a minute on two cores at the test profile). For a deeper search by hand,
/// `STRIA_FUZZ_SCALE=20` multiplies the case counts and `STRIA_FUZZ_SEED=<n>` changes the seed.
fn config(cases: u32) -> Config {
    let env = |name: &str| std::env::var(name).ok().and_then(|v| v.parse::<u64>().ok());
    let scale = env("STRIA_FUZZ_SCALE").unwrap_or(1).max(1) as u32;
    Config {
        cases: cases.saturating_mul(scale),
        failure_persistence: None,
        rng_algorithm: RngAlgorithm::ChaCha,
        rng_seed: RngSeed::Fixed(env("STRIA_FUZZ_SEED").unwrap_or(0x5712_1a00)),
        max_shrink_iters: 2000,
        ..Config::default()
    }
}

const DEMOS: [&str; 3] = ["quick.toml", "overnight.toml", "screening.toml"];

fn demo_text(name: &str) -> String {
    std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("demo")
            .join(name),
    )
    .expect("demo study readable")
}

/// A study path in a directory that does not exist, so a fuzzed `constants_file` can never
/// reach a real file.
fn study_path(name: &str) -> PathBuf {
    Path::new("/nonexistent-stria-fuzz").join(name)
}

fn panic_text(p: Box<dyn std::any::Any + Send>) -> String {
    p.downcast_ref::<&str>()
        .map(|s| s.to_string())
        .or_else(|| p.downcast_ref::<String>().cloned())
        .unwrap_or_else(|| "(non-text panic)".into())
}

/// Run `f`, turning a panic into a test failure that shows the input.
fn no_panic<T>(what: &str, input: &str, f: impl FnOnce() -> T) -> Result<T, TestCaseError> {
    catch_unwind(AssertUnwindSafe(f)).map_err(|p| {
        TestCaseError::fail(format!(
            "{what} panicked: {}\n--- input ---\n{input}",
            panic_text(p)
        ))
    })
}

fn from_command_line(file: &Path) -> bool {
    file.to_string_lossy().starts_with("command line")
}

/// Checks every `CliError::Input` must pass; returns its line.
fn check_input_error(
    e: &CliError,
    text: &str,
    allowed_files: &[&Path],
) -> Result<(PathBuf, Option<usize>, String, String), TestCaseError> {
    let CliError::Input {
        file,
        line,
        field,
        message,
        allowed,
    } = e
    else {
        return Err(TestCaseError::fail(format!(
            "bad input gave a runtime error: {e}\n--- input ---\n{text}"
        )));
    };
    let shown = e.to_string();
    prop_assert!(!field.trim().is_empty(), "empty field: {shown}\n{text}");
    prop_assert!(!message.trim().is_empty(), "empty message: {shown}\n{text}");
    prop_assert!(
        !message.trim_end().ends_with(':'),
        "message ends before saying what was wrong: {shown}\n{text}"
    );
    prop_assert!(
        !allowed.trim().is_empty(),
        "no allowed values: {shown}\n{text}"
    );
    prop_assert!(
        allowed_files.iter().any(|f| file == f) || from_command_line(file),
        "unexpected file {}: {shown}",
        file.display()
    );
    if let Some(l) = line {
        let n = text.lines().count().max(1);
        prop_assert!(
            *l >= 1 && *l <= n + 1,
            "line {l} outside the {n} lines: {shown}\n{text}"
        );
    }
    Ok((file.clone(), *line, field.clone(), message.clone()))
}

/// Every value the parser accepted knows its line, and that line holds its key.
fn check_raw_lines(text: &str, path: &Path) -> Result<(), TestCaseError> {
    let Ok(raw) = RawStudy::parse(path, text) else {
        return Ok(());
    };
    let lines: Vec<&str> = text.lines().collect();
    for ((section, key), entry) in &raw.entries {
        let Origin::File(l) = entry.origin else {
            continue;
        };
        prop_assert!(
            l >= 1 && l <= lines.len(),
            "[{section}] {key}: line {l}\n{text}"
        );
        prop_assert!(
            lines[l - 1].contains(key.as_str()),
            "[{section}] {key}: line {l} is `{}`\n{text}",
            lines[l - 1]
        );
    }
    Ok(())
}

/// The study-file checks: an `Input` error with a non-empty field, message and allowed; a line
/// for syntax errors, unknown names and values present in the file. An accepted study must
/// evaluate (or fail with a reason) at its baseline and the corners of its bounds without
/// panicking, and its resolved form must load back to the same study.
fn check_study_outcome(
    text: &str,
    path: &Path,
    sets: &[String],
    touched: Option<(usize, &str)>,
) -> Result<(), TestCaseError> {
    let shown_input = format!("{text}\n--- sets: {sets:?}");
    let outcome = no_panic("Study::from_text", &shown_input, || {
        Study::from_text(path, text, sets)
    })?;
    check_raw_lines(text, path)?;
    match outcome {
        Err(e) => {
            let (file, line, field, message) = check_input_error(&e, &shown_input, &[path])?;
            let shown = e.to_string();
            if file == path {
                if field == "(syntax)" || message.contains("unknown") {
                    prop_assert!(line.is_some(), "no line: {shown}\n{shown_input}");
                }
                // A key present in the file is reported at its own line.
                if let Ok(raw) = RawStudy::parse(path, text) {
                    if let Some((section, key)) = field.rsplit_once('.') {
                        if let Some(entry) = raw.get(section, key) {
                            if let Origin::File(l) = entry.origin {
                                prop_assert_eq!(line, Some(l), "{}\n{}", shown, shown_input);
                            }
                        }
                    }
                }
                // The mutated value's own error names the mutated line.
                if let Some((l, f)) = touched {
                    if field == f {
                        prop_assert_eq!(line, Some(l), "{}\n{}", shown, shown_input);
                    }
                }
            }
        }
        Ok((study, warnings)) => {
            for w in &warnings {
                prop_assert!(!w.field.is_empty() && !w.message.is_empty(), "{w}");
            }
            prop_assert!(
                study.constants.validate().is_ok(),
                "accepted ROM constants the model refuses: {:?}\n{}",
                study.constants.validate(),
                shown_input
            );
            for v in &study.variables {
                prop_assert!(
                    v.lower.is_finite() && v.upper.is_finite() && v.lower < v.upper,
                    "{v:?}"
                );
            }
            let mut points = vec![study.baseline_x()];
            let n = study.variables.len();
            for corner in 0..(1usize << n) {
                points.push(
                    study
                        .variables
                        .iter()
                        .enumerate()
                        .map(|(i, v)| {
                            if corner >> i & 1 == 1 {
                                v.upper
                            } else {
                                v.lower
                            }
                        })
                        .collect(),
                );
            }
            for x in &points {
                let _ = no_panic(&format!("evaluate_point({x:?})"), &shown_input, || {
                    study.evaluate_point(x)
                })?;
            }
            let _ = no_panic("check::bound_warnings", &shown_input, || {
                studies::check::bound_warnings(&study)
            })?;
            let resolved = study.to_resolved_toml();
            let again = no_panic("reloading the resolved study", &resolved, || {
                Study::from_text(path, &resolved, &[])
            })?;
            match again {
                Ok((again, _)) => prop_assert_eq!(
                    again.fingerprint(),
                    study.fingerprint(),
                    "resolved study:\n{}",
                    resolved
                ),
                Err(e) => {
                    return Err(TestCaseError::fail(format!(
                        "the resolved form of an accepted study is refused: {e}\n--- resolved ---\n{resolved}\n--- input ---\n{shown_input}"
                    )))
                }
            }
        }
    }
    Ok(())
}

// ---------------------------------------------------------------------------------------------
// Pools

/// Values that are wrong somewhere (or right in a surprising form).
const VALUE_POOL: &[&str] = &[
    "-1",
    "-0.5",
    "-0.0",
    "0",
    "0.0",
    "1",
    "2",
    "3",
    "1e308",
    "-1e308",
    "1e-320",
    "5e-324",
    "nan",
    "-nan",
    "inf",
    "-inf",
    "+inf",
    "9223372036854775807",
    "-9223372036854775808",
    "18446744073709551616",
    "99999999999999999999999",
    "1_000",
    "0x10",
    "0o7",
    "0b1",
    "\"\"",
    "\" \"",
    "\"x\"",
    "\"NaCl\"",
    "\"custom\"",
    "\"0.5 mm\"",
    "\"12\"",
    "\"nan\"",
    "'literal'",
    "\"\"\"two\nlines\"\"\"",
    "\"caf\u{e9} \u{2603}\"",
    "true",
    "false",
    "[]",
    "[1, 2]",
    "[1e-6, 0.002]",
    "[5e-324, 1e-320]",
    "[1e308, -1e308, 0]",
    "[\"a\"]",
    "[\"salt_removal_rate\"]",
    "[\"salt_removal_rate\", \"salt_removal_rate\"]",
    "[\"specific_energy\", \"levelised_cost\", \"membrane_cost\", \"salt_removal_fraction\", \"salt_removal_rate\"]",
    "[[1], 2]",
    "{}",
    "{ a = 1 }",
    "{ lower_um = 1 }",
    "1979-05-27",
    "1979-05-27T07:32:00Z",
    "07:32:00",
    "",
    "=",
    "\"unterminated",
    "[1,",
];

/// Section headers to insert.
const HEADER_POOL: &[&str] = &[
    "[variables]",
    "[variables.pich]",
    "[variables.length]",
    "[variables.gap]",
    "[[water]]",
    "[[variables.pitch]]",
    "[rom]",
    "[water.extra]",
    "[study.name]",
    "[]",
    "[ ]",
    "[\"\"]",
    "[variables.\"\"]",
    "[a b]",
    "[chanel]",
    "[Channel]",
];

/// Unit suffixes to swap in.
const UNIT_POOL: &[&str] = &[
    "_mm", "_um", "_m", "_cm", "_nm", "_cm_s", "_m_s", "_C", "_K", "_V", "_mV", "_A", "_g_L",
    "_mol_m3", "_mM", "_kPa", "_Pa", "_bar", "_percent", "_kWh", "_ohm_cm2", "",
];

/// Unit suffixes recognised at the end of a key (longest first).
const UNIT_SUFFIXES: &[&str] = &[
    "_ohm_cm2", "_mol_m3", "_per_kWh", "_m3_day", "_cm_s", "_percent", "_years", "_g_L", "_kPa",
    "_mm", "_um", "_m", "_C", "_V", "_A",
];

fn value_strategy() -> impl Strategy<Value = String> {
    prop_oneof![
        6 => prop::sample::select(VALUE_POOL).prop_map(String::from),
        1 => any::<f64>().prop_map(|x| format!("{x:?}")),
        1 => any::<i64>().prop_map(|x| x.to_string()),
        1 => "[a-zA-Z0-9_ .-]{0,12}".prop_map(|s| format!("\"{s}\"")),
        1 => "[a-z_]{1,10}",
    ]
}

fn all_keys() -> Vec<String> {
    let mut out: Vec<String> = KEYS.iter().map(|k| k.key.to_string()).collect();
    out.extend(keys::rom_keys().into_iter().map(|(k, _)| k));
    out
}

/// A near-miss of `key`: one edit, a key of another section, a random word, a quoted or
/// dotted form.
#[derive(Debug, Clone)]
enum KeyEdit {
    Delete(Index),
    Insert(Index, char),
    Substitute(Index, char),
    Transpose(Index),
    Case,
    Other(Index),
    Word(String),
    Quoted,
    Dotted(String),
    Empty,
}

fn key_edit_strategy() -> impl Strategy<Value = KeyEdit> {
    let letter = prop::sample::select(&['a', 'm', 'u', '_', 'x', 'C', '.', '-', ' ', '='][..]);
    prop_oneof![
        any::<Index>().prop_map(KeyEdit::Delete),
        (any::<Index>(), letter.clone()).prop_map(|(i, c)| KeyEdit::Insert(i, c)),
        (any::<Index>(), letter).prop_map(|(i, c)| KeyEdit::Substitute(i, c)),
        any::<Index>().prop_map(KeyEdit::Transpose),
        Just(KeyEdit::Case),
        any::<Index>().prop_map(KeyEdit::Other),
        "[a-z_]{1,12}".prop_map(KeyEdit::Word),
        Just(KeyEdit::Quoted),
        "[a-z]{1,6}".prop_map(KeyEdit::Dotted),
        Just(KeyEdit::Empty),
    ]
}

fn edit_key(key: &str, edit: &KeyEdit) -> String {
    let chars: Vec<char> = key.chars().collect();
    match edit {
        KeyEdit::Delete(i) if !chars.is_empty() => {
            let mut c = chars.clone();
            c.remove(i.index(c.len()));
            c.into_iter().collect()
        }
        KeyEdit::Insert(i, ch) => {
            let mut c = chars.clone();
            c.insert(i.index(c.len() + 1), *ch);
            c.into_iter().collect()
        }
        KeyEdit::Substitute(i, ch) if !chars.is_empty() => {
            let mut c = chars.clone();
            let j = i.index(c.len());
            c[j] = *ch;
            c.into_iter().collect()
        }
        KeyEdit::Transpose(i) if chars.len() >= 2 => {
            let mut c = chars.clone();
            let j = i.index(c.len() - 1);
            c.swap(j, j + 1);
            c.into_iter().collect()
        }
        KeyEdit::Case => key.to_uppercase(),
        KeyEdit::Other(i) => {
            let all = all_keys();
            all[i.index(all.len())].clone()
        }
        KeyEdit::Word(w) => w.clone(),
        KeyEdit::Quoted => format!("\"{key}\""),
        KeyEdit::Dotted(w) => format!("{key}.{w}"),
        KeyEdit::Empty => "\"\"".to_string(),
        _ => format!("{key}x"),
    }
}

// ---------------------------------------------------------------------------------------------
// Study-file mutations

#[derive(Debug, Clone)]
enum Mutation {
    DeleteLine(Index),
    DuplicateLine(Index),
    SwapLines(Index, Index),
    ReplaceValue(Index, String),
    ReplaceKey(Index, KeyEdit),
    Truncate(Index),
    InsertHeader(Index, String),
    ChangeUnit(Index, String),
    /// Multiply the first number found on a key line (values near the edges of the ranges).
    Scale(Index, f64),
}

const FACTORS: &[f64] = &[
    0.0, 1e-300, 1e-6, 1e-3, 0.01, 0.1, 0.5, 0.9, 0.99, 1.01, 1.1, 2.0, 5.0, 10.0, 100.0, 1e4,
    1e300, -1.0,
];

fn mutation_strategy() -> impl Strategy<Value = Mutation> {
    let header = prop_oneof![
        3 => prop::sample::select(SECTIONS).prop_map(|(s, _)| format!("[{s}]")),
        2 => prop::sample::select(HEADER_POOL).prop_map(String::from),
        1 => "[a-z_.]{1,10}".prop_map(|s| format!("[{s}]")),
    ];
    prop_oneof![
        1 => any::<Index>().prop_map(Mutation::DeleteLine),
        1 => any::<Index>().prop_map(Mutation::DuplicateLine),
        1 => (any::<Index>(), any::<Index>()).prop_map(|(a, b)| Mutation::SwapLines(a, b)),
        4 => (any::<Index>(), value_strategy()).prop_map(|(i, v)| Mutation::ReplaceValue(i, v)),
        2 => (any::<Index>(), key_edit_strategy()).prop_map(|(i, e)| Mutation::ReplaceKey(i, e)),
        1 => any::<Index>().prop_map(Mutation::Truncate),
        1 => (any::<Index>(), header).prop_map(|(i, h)| Mutation::InsertHeader(i, h)),
        3 => (any::<Index>(), prop::sample::select(FACTORS)).prop_map(|(i, f)| Mutation::Scale(i, f)),
        1 => (any::<Index>(), prop::sample::select(UNIT_POOL).prop_map(String::from))
            .prop_map(|(i, u)| Mutation::ChangeUnit(i, u)),
    ]
}

/// A `key = value` line of the file: its index, section, key, and the text before the value.
struct KeyLine {
    index: usize,
    section: String,
    key: String,
}

fn key_lines(lines: &[String]) -> Vec<KeyLine> {
    let mut section = String::new();
    let mut out = Vec::new();
    for (index, l) in lines.iter().enumerate() {
        let t = l.trim();
        if t.starts_with('[') {
            section = t.trim_matches(|c| c == '[' || c == ']').to_string();
        } else if !t.starts_with('#') {
            if let Some((k, _)) = t.split_once('=') {
                out.push(KeyLine {
                    index,
                    section: section.clone(),
                    key: k.trim().to_string(),
                });
            }
        }
    }
    out
}

fn join(lines: &[String]) -> String {
    let mut s = lines.join("\n");
    s.push('\n');
    s
}

/// Apply one mutation; also returns the 1-based line and the field of a replaced value.
fn mutate(text: &str, m: &Mutation) -> (String, Option<(usize, String)>) {
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    let keyed = key_lines(&lines);
    let needs_key = matches!(
        m,
        Mutation::ReplaceValue(..)
            | Mutation::ReplaceKey(..)
            | Mutation::ChangeUnit(..)
            | Mutation::Scale(..)
    );
    let needs_line = matches!(
        m,
        Mutation::DeleteLine(_) | Mutation::DuplicateLine(_) | Mutation::SwapLines(..)
    );
    if (needs_key && keyed.is_empty()) || (needs_line && lines.is_empty()) {
        // Earlier mutations left nothing to work on.
        return (text.to_string(), None);
    }
    match m {
        Mutation::DeleteLine(i) => {
            lines.remove(i.index(lines.len()));
            (join(&lines), None)
        }
        Mutation::DuplicateLine(i) => {
            let j = i.index(lines.len());
            let l = lines[j].clone();
            lines.insert(j, l);
            (join(&lines), None)
        }
        Mutation::SwapLines(a, b) => {
            let (a, b) = (a.index(lines.len()), b.index(lines.len()));
            lines.swap(a, b);
            (join(&lines), None)
        }
        Mutation::ReplaceValue(i, v) => {
            let k = &keyed[i.index(keyed.len())];
            lines[k.index] = format!("{} = {v}", k.key);
            // A multi-line value moves nothing above it: the key stays on its line.
            (
                join(&lines),
                Some((k.index + 1, format!("{}.{}", k.section, k.key))),
            )
        }
        Mutation::ReplaceKey(i, e) => {
            let k = &keyed[i.index(keyed.len())];
            let rest = lines[k.index].split_once('=').map(|(_, r)| r.to_string());
            lines[k.index] = format!("{} ={}", edit_key(&k.key, e), rest.unwrap_or_default());
            (join(&lines), None)
        }
        Mutation::Truncate(i) => {
            let mut at = i.index(text.len() + 1);
            while !text.is_char_boundary(at) {
                at -= 1;
            }
            (text[..at].to_string(), None)
        }
        Mutation::InsertHeader(i, h) => {
            lines.insert(i.index(lines.len() + 1), h.clone());
            (join(&lines), None)
        }
        Mutation::ChangeUnit(i, u) => {
            let k = &keyed[i.index(keyed.len())];
            let stem = UNIT_SUFFIXES
                .iter()
                .find_map(|s| k.key.strip_suffix(s))
                .unwrap_or(&k.key);
            let rest = lines[k.index]
                .split_once('=')
                .map(|(_, r)| r.to_string())
                .unwrap_or_default();
            lines[k.index] = format!("{stem}{u} ={rest}");
            (join(&lines), None)
        }
        Mutation::Scale(i, f) => {
            let k = &keyed[i.index(keyed.len())];
            let rest = lines[k.index]
                .split_once('=')
                .map(|(_, r)| r.to_string())
                .unwrap_or_default();
            let value = rest.split('#').next().unwrap_or("").trim();
            let scaled = match value.parse::<f64>() {
                Ok(x) => format!("{:?}", x * f),
                // Not a number (text, a list): the first number inside a list is scaled.
                Err(_) => value
                    .trim_start_matches('[')
                    .split(',')
                    .next()
                    .and_then(|t| t.trim().parse::<f64>().ok())
                    .map(|x| value.replacen(&x.to_string(), &format!("{:?}", x * f), 1))
                    .unwrap_or_else(|| value.to_string()),
            };
            lines[k.index] = format!("{} = {scaled}", k.key);
            (
                join(&lines),
                Some((k.index + 1, format!("{}.{}", k.section, k.key))),
            )
        }
    }
}

proptest! {
    #![proptest_config(config(3000))]

    /// Property 1: one mutation of a demo study.
    #[test]
    fn mutated_demo_studies_never_panic_and_are_named(
        demo in 0..DEMOS.len(),
        m in mutation_strategy(),
    ) {
        let text = demo_text(DEMOS[demo]);
        let (mutated, touched) = mutate(&text, &m);
        let path = study_path(DEMOS[demo]);
        let touched = touched.as_ref().map(|(l, f)| (*l, f.as_str()));
        check_study_outcome(&mutated, &path, &[], touched)?;
    }
}

proptest! {
    #![proptest_config(config(1000))]

    /// Property 1b: two to four mutations stacked (only the general checks).
    #[test]
    fn stacked_mutations_never_panic(
        demo in 0..DEMOS.len(),
        ms in prop::collection::vec(mutation_strategy(), 2..=4),
    ) {
        let mut text = demo_text(DEMOS[demo]);
        for m in &ms {
            text = mutate(&text, m).0;
        }
        check_study_outcome(&text, &study_path(DEMOS[demo]), &[], None)?;
    }
}

// ---------------------------------------------------------------------------------------------
// --set

fn set_strategy() -> impl Strategy<Value = String> {
    let valid_field = prop::sample::select(KEYS).prop_map(|k| format!("{}.{}", k.section, k.key));
    let section = prop_oneof![
        3 => prop::sample::select(SECTIONS).prop_map(|(s, _)| s.to_string()),
        1 => "[a-z_.]{0,8}",
    ];
    let random_field = (section, "[a-zA-Z_]{0,10}").prop_map(|(s, k)| format!("{s}.{k}"));
    let lhs = prop_oneof![
        5 => valid_field,
        2 => random_field,
        1 => prop::sample::select(&["", "a.b", "a.b.c", "x", ".", "..", " water . salt "][..])
            .prop_map(String::from),
    ];
    prop_oneof![
        8 => (lhs.clone(), value_strategy()).prop_map(|(l, v)| format!("{l}={v}")),
        1 => lhs,
        1 => prop::sample::select(&["=", "x=", "=1", "a.b", "a.b.c=1", "==", "water.salt==KCl"][..])
            .prop_map(String::from),
    ]
}

proptest! {
    #![proptest_config(config(1500))]

    /// Property 2: random `--set` options on the quick demo.
    #[test]
    fn random_set_options_never_panic_and_name_the_command_line(
        sets in prop::collection::vec(set_strategy(), 1..=3),
    ) {
        let text = demo_text("quick.toml");
        let path = study_path("quick.toml");
        // Each option in turn, as `Study::from_text` applies them: a refused option names the
        // command line and the option.
        let mut raw = RawStudy::parse(&path, &text).expect("demo parses");
        let mut set_fields: Vec<String> = Vec::new();
        for s in &sets {
            match no_panic("apply_set", s, || raw.apply_set(s))? {
                Ok(()) => set_fields.push(s.split_once('=').map(|(l, _)| l.trim().to_string()).unwrap_or_default()),
                Err(e) => {
                    let (file, line, field, _) = check_input_error(&e, s, &[])?;
                    prop_assert_eq!(file, PathBuf::from("command line"));
                    prop_assert_eq!(line, None);
                    prop_assert!(field.starts_with("--set"), "{}", e);
                    break;
                }
            }
        }
        check_study_outcome(&text, &path, &sets, None)?;
        // A value given by --set and refused is reported as coming from the command line.
        if let Err(CliError::Input { file, field, .. }) = Study::from_text(&path, &text, &sets) {
            if set_fields.contains(&field) {
                prop_assert!(from_command_line(&file), "{} in {}", field, file.display());
            }
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Fit data (CSV)

const COLUMN_POOL: &[&str] = &[
    "curve",
    "layer_voltage_V",
    "current_density_A_m2",
    "concentration_mol_m3",
    "velocity_m_s",
    "pitch_m",
    "open_fraction",
    "gap_m",
    "temperature_K",
    "position_m",
    "layer_voltage",
    "Curve",
    "",
    " ",
    "\"curve\"",
    "#x",
];

const CELL_POOL: &[&str] = &[
    "a",
    "b",
    "0",
    "0.1",
    "5",
    "1e-4",
    "0.5",
    "300",
    "-1",
    "-0.0",
    "1e308",
    "1e309",
    "nan",
    "NaN",
    "inf",
    "-inf",
    "",
    " ",
    "x",
    "1,5",
    "\"1\"",
    "\"a,b\"",
    "\"multi\nline\"",
    "\"",
    "#",
    "# comment",
    "0x10",
    "1_000",
    "273.15",
    "373.16",
    "\u{e9}",
];

fn csv_strategy() -> impl Strategy<Value = String> {
    let header = prop::collection::vec(prop::sample::select(COLUMN_POOL), 0..6).prop_map(|cols| {
        let mut c: Vec<&str> = vec!["curve", "layer_voltage_V", "current_density_A_m2"];
        c.extend(cols);
        c
    });
    let header = prop_oneof![
        3 => header.clone(),
        1 => (header, any::<Index>(), any::<Index>()).prop_map(|(mut h, a, b)| {
            // Drop one column or shuffle two.
            let i = a.index(h.len());
            if b.index(2) == 0 { h.remove(i); } else { let j = b.index(h.len()); h.swap(i, j); }
            h
        }),
    ];
    let row = prop::collection::vec(prop::sample::select(CELL_POOL), 0..12);
    let extra =
        prop::sample::select(&["", "# note", "   ", "  # indented note", "\t", ",", ",,,"][..]);
    let sep = prop::sample::select(&["\n", "\r\n"][..]);
    (
        header,
        prop::collection::vec(row, 0..6),
        prop::collection::vec((any::<Index>(), extra), 0..3),
        sep,
        any::<bool>(),
    )
        .prop_map(|(header, rows, extras, sep, leading)| {
            let mut lines: Vec<String> = Vec::new();
            if leading {
                lines.push("# invented, for the fuzz test only".into());
            }
            lines.push(header.join(","));
            for r in rows {
                // Rows longer than the header by more than one cell are cut to its width,
                // so that the cells, not the width, decide most cases.
                let mut cells: Vec<&str> = r.clone();
                if cells.len() > header.len() + 1 {
                    cells.truncate(header.len());
                }
                lines.push(cells.join(","));
            }
            for (i, e) in extras {
                let at = i.index(lines.len() + 1);
                lines.insert(at, e.to_string());
            }
            let mut s = lines.join(sep);
            s.push_str(sep);
            s
        })
}

fn check_csv(text: &str) -> Result<(), TestCaseError> {
    let path = Path::new("data.csv");
    let out = no_panic("fit::data::parse", text, || data::parse(path, text))?;
    let lines: Vec<&str> = text.lines().collect();
    match out {
        Ok(set) => {
            for p in &set.points {
                prop_assert!(p.line >= 1 && p.line <= lines.len(), "{p:?}\n{text}");
                prop_assert!(
                    lines[p.line - 1].contains(p.curve.as_str())
                        || p.curve.contains('\n')
                        || p.curve.contains('"'),
                    "point {p:?} is not on its line\n{text}"
                );
                prop_assert!(p.layer_voltage_v.is_finite() && p.current_density_a_m2.is_finite());
            }
        }
        Err(e) => {
            let (_, line, field, message) = check_input_error(&e, text, &[path])?;
            // Only an empty file (blank lines and comments, `#` in the first column) has no
            // line to name.
            let blank = text
                .split(['\n', '\r'])
                .all(|l| l.trim().is_empty() || l.starts_with('#'));
            prop_assert_eq!(line.is_none(), blank, "{}\n{:?}", e, text);
            // A bad cell's line holds that cell.
            // A bad cell's record starts on the line named (a quoted cell may run on over
            // the lines below).
            if let (Some(l), Some(cell)) = (
                line,
                message
                    .strip_prefix('`')
                    .and_then(|m| m.split_once("` is not a number"))
                    .map(|(c, _)| c),
            ) {
                let from_line = lines
                    .get(l - 1..)
                    .map(|ls| ls.join("\n"))
                    .unwrap_or_default();
                let first_field = lines.get(l - 1).map(|t| t.trim()).unwrap_or("");
                // (Quotes change what a cell reads as, so a file with quotes is not checked.)
                prop_assert!(
                    (from_line.contains(cell) || text.contains('"'))
                        && !first_field.is_empty()
                        && !first_field.starts_with('#'),
                    "{field}: `{cell}` is not in the record of line {l}\n{text:?}"
                );
            }
        }
    }
    Ok(())
}

proptest! {
    #![proptest_config(config(2000))]

    /// Property 3a: structured random CSV data for `stria fit`.
    #[test]
    fn random_fit_data_never_panics_and_names_the_row(text in csv_strategy()) {
        check_csv(&text)?;
    }

    /// Property 3b: random bytes (made text the way a reader would see them).
    #[test]
    fn random_bytes_as_fit_data_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..200)) {
        let text = String::from_utf8_lossy(&bytes).into_owned();
        check_csv(&text)?;
    }
}

// ---------------------------------------------------------------------------------------------
// Constants files

fn constants_line_strategy() -> impl Strategy<Value = String> {
    let rom = keys::rom_keys();
    let names: Vec<String> = rom.iter().map(|(k, _)| k.clone()).collect();
    let valid = (prop::sample::select(names.clone()), value_strategy())
        .prop_map(|(k, v)| format!("{k} = {v}"));
    let sane = (
        prop::sample::select(rom.clone()),
        prop::sample::select(&[0.5, 1.0, 1.01, 2.0, 0.0, -1.0, 1e3][..]),
    )
        .prop_map(|((k, d), f)| format!("{k} = {:?}", d * f));
    let near = (prop::sample::select(names), key_edit_strategy())
        .prop_map(|(k, e)| format!("{} = 1.0", edit_key(&k, &e)));
    prop_oneof![
        4 => valid,
        4 => sane,
        2 => near,
        1 => prop::sample::select(
            &["[rom]", "rom = 5", "[other]", "[[rom]]", "# note", "", "= 1", "x", "[rom.x]"][..]
        ).prop_map(String::from),
        1 => "[ -~]{0,20}",
    ]
}

proptest! {
    #![proptest_config(config(800))]

    /// Property 3c: random constants files named by `[rom] constants_file`.
    #[test]
    fn random_constants_files_never_panic_and_name_the_line(
        lines in prop::collection::vec(constants_line_strategy(), 0..8),
    ) {
        let dir = tempfile::tempdir().unwrap();
        let constants = dir.path().join("c.toml");
        let ctext = lines.join("\n") + "\n";
        std::fs::write(&constants, &ctext).unwrap();
        let study = dir.path().join("quick.toml");
        let text = demo_text("quick.toml").replacen(
            "[variables.pitch]",
            "[rom]\nconstants_file = \"c.toml\"\n\n[variables.pitch]",
            1,
        );
        let shown = format!("{ctext}\n--- (constants file)");
        match no_panic("Study::from_text", &shown, || Study::from_text(&study, &text, &[]))? {
            Ok(_) => check_study_outcome(&text, &study, &[], None)?,
            Err(e) => {
                let (file, line, _, message) =
                    check_input_error(&e, &ctext, &[&constants, &study])?;
                if file == constants {
                    prop_assert!(line.is_some(), "no line: {e}\n{shown}");
                } else {
                    prop_assert!(line.is_some() || !message.is_empty(), "{e}");
                }
            }
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Regressions: each shape below was found by the properties above (or next to one) and fixed.

fn input_parts(e: CliError) -> (PathBuf, Option<usize>, String, String, String) {
    match e {
        CliError::Input {
            file,
            line,
            field,
            message,
            allowed,
        } => (file, line, field, message, allowed),
        other => panic!("expected bad input, got {other}"),
    }
}

fn quick_with(from: &str, to: &str) -> String {
    let text = demo_text("quick.toml");
    assert!(text.contains(from), "the demo has no `{from}`");
    text.replacen(from, to, 1)
}

fn line_holding(text: &str, needle: &str) -> usize {
    text.lines().position(|l| l.contains(needle)).unwrap() + 1
}

#[test]
fn fit_data_header_with_an_empty_column_name_is_named() {
    // Was: field "" and "unknown column ``".
    for (text, column) in [
        (
            "curve,,layer_voltage_V,current_density_A_m2\na,0.1,0.1,5\n",
            2,
        ),
        ("curve,layer_voltage_V,current_density_A_m2,\na,0.1,5,\n", 4),
        (",\n", 1),
    ] {
        let (_, line, field, message, allowed) =
            input_parts(data::parse(Path::new("d.csv"), text).unwrap_err());
        assert_eq!(line, Some(1), "{text:?}");
        assert_eq!(field, "header");
        assert!(
            message.contains(&format!("column {column}")) && message.contains("no name"),
            "{message}"
        );
        assert!(allowed.contains("curve"), "{allowed}");
    }
}

#[test]
fn fit_data_blank_lines_of_spaces_are_blank() {
    // Was: a line of spaces before the header was read as a header of one empty column,
    // reported at the next line.
    let text = "   \ncurve,layer_voltage_V,current_density_A_m2\n\t\na,0.1,5\n";
    let d = data::parse(Path::new("d.csv"), text).unwrap();
    assert_eq!(d.points.len(), 1);
    assert_eq!(d.points[0].line, 4);
}

#[test]
fn fit_data_rows_are_named_by_their_own_line() {
    // Was: the CSV reader's position of a row is where the previous row ended, so with
    // CRLF line endings, or after a comment or an empty line, the line before was named.
    let head = "curve,layer_voltage_V,current_density_A_m2";
    for (text, line) in [
        (format!("{head}\r\na,0.1,5\r\nb,0.2,x\r\n"), 3),
        (format!("{head}\n# a comment\n\na,0.1,x\n"), 4),
        (format!("# source\n{head}\na,0.1,5\n\n# more\nb,-1,5\n"), 6),
    ] {
        let (_, l, _, _, _) = input_parts(data::parse(Path::new("d.csv"), &text).unwrap_err());
        assert_eq!(l, Some(line), "{text:?}");
    }
    let d = data::parse(
        Path::new("d.csv"),
        &format!("{head}\r\na,0.1,5\r\n# c\r\nb,0.2,6\r\n"),
    )
    .unwrap();
    assert_eq!(
        d.points.iter().map(|p| p.line).collect::<Vec<_>>(),
        vec![2, 4]
    );
}

#[test]
fn empty_names_are_shown_as_quotes() {
    // Was: an empty field for `"" = 1` above the sections, `[""]`, and `"" = 1` in a
    // constants file.
    let path = study_path("quick.toml");
    let cases = [
        (format!("\"\" = 1\n{}", demo_text("quick.toml")), "\"\""),
        (
            format!("[\"\"]\na = 1\n{}", demo_text("quick.toml")),
            "\"\"",
        ),
        (
            format!("{}\n[variables.\"\"]\na = 1\n", demo_text("quick.toml")),
            "variables.\"\"",
        ),
        (quick_with("[water]\n", "[water]\n\"\" = 1\n"), "water.\"\""),
    ];
    for (text, want) in cases {
        let (_, line, field, message, _) =
            input_parts(Study::from_text(&path, &text, &[]).unwrap_err());
        assert_eq!(field, want);
        assert!(line.is_some() && !message.contains("``"), "{message}");
    }
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("c.toml"), "\"\" = 1\n").unwrap();
    let e = Study::from_text(&dir.path().join("s.toml"), &with_constants_file(), &[]);
    let (file, line, field, _, _) = input_parts(e.unwrap_err());
    assert_eq!(
        (file, line, field.as_str()),
        (dir.path().join("c.toml"), Some(1), "\"\"")
    );
}

fn with_constants_file() -> String {
    quick_with(
        "[variables.pitch]",
        "[rom]\nconstants_file = \"c.toml\"\n\n[variables.pitch]",
    )
}

#[test]
fn rom_constants_the_model_refuses_are_refused_at_their_line() {
    // Was: accepted by `stria check`; every evaluation then failed at run time.
    let text = quick_with(
        "[variables.pitch]",
        "[rom]\nalpha_0 = 0.0\n\n[variables.pitch]",
    );
    let (_, line, field, message, allowed) =
        input_parts(Study::from_text(&study_path("quick.toml"), &text, &[]).unwrap_err());
    assert_eq!(field, "rom.alpha_0");
    assert_eq!(line, Some(line_holding(&text, "alpha_0")));
    assert!(message.contains("out of range"), "{message}");
    // The model's own admissible range (model::RomConstants::validate).
    assert_eq!(allowed, "0.001 to 1");

    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("c.toml"),
        "# constants\nalpha_max = 0.5\nonset_voltage = 500.0\n",
    )
    .unwrap();
    let e = Study::from_text(&dir.path().join("s.toml"), &with_constants_file(), &[]);
    let (file, line, field, _, allowed) = input_parts(e.unwrap_err());
    assert_eq!(file, dir.path().join("c.toml"));
    assert_eq!((line, field.as_str()), (Some(3), "onset_voltage"));
    assert!(allowed.contains("0.5 to 200"), "{allowed}");
}

#[test]
fn subnormal_numbers_are_refused_before_the_model_sees_them() {
    // Was: `length_m = 1e-320` passed the "> 0" range and the model panicked in
    // evaluate (a clamp with a NaN bound in the interface inversion).
    let text = quick_with("length_m = 0.45", "length_m = 1e-320");
    let (_, line, field, message, allowed) =
        input_parts(Study::from_text(&study_path("quick.toml"), &text, &[]).unwrap_err());
    assert_eq!(field, "channel.length_m");
    assert_eq!(line, Some(line_holding(&text, "length_m")));
    assert!(message.contains("too small"), "{message}");
    assert!(allowed.contains(">= 1e-5 and <= 20 m"), "{allowed}");
    let e = Study::from_text(
        &study_path("quick.toml"),
        &demo_text("quick.toml"),
        &["variables.pitch.lower_um=5e-324".to_string()],
    );
    let (file, _, field, _, _) = input_parts(e.unwrap_err());
    assert_eq!(file, PathBuf::from("command line (--set)"));
    assert_eq!(field, "variables.pitch.lower_um");
    // Zero where zero is allowed stays allowed.
    let text = quick_with(
        "pattern_surcharge_per_m2 = 45.0",
        "pattern_surcharge_per_m2 = 0.0",
    );
    assert!(Study::from_text(&study_path("quick.toml"), &text, &[]).is_ok());
}

#[test]
fn a_key_with_nothing_after_its_equals_sign_at_the_end_says_so() {
    // Was: "not valid TOML: " with nothing after it.
    let text = "[study]\nname =";
    let (_, line, field, message, _) =
        input_parts(Study::from_text(&study_path("s.toml"), text, &[]).unwrap_err());
    assert_eq!((line, field.as_str()), (Some(2), "(syntax)"));
    assert!(message.ends_with("a value is expected here"), "{message}");
    // The parser's two-line messages are kept on one line.
    let (_, _, _, message, _) =
        input_parts(Study::from_text(&study_path("s.toml"), "a = t\n", &[]).unwrap_err());
    assert!(
        !message.contains('\n') && message.contains("; expected"),
        "{message}"
    );
}

#[test]
fn a_list_of_sections_is_called_that() {
    // Was: "must be a section (a table), not a single value" for `[[water]]`.
    let text = quick_with("[water]", "[[water]]");
    let (_, line, field, message, _) =
        input_parts(Study::from_text(&study_path("quick.toml"), &text, &[]).unwrap_err());
    assert_eq!(field, "water");
    assert_eq!(line, Some(line_holding(&text, "[[water]]")));
    assert!(message.contains("[[water]]"), "{message}");
}

#[test]
fn a_constants_file_with_a_rom_section_has_nothing_outside_it() {
    // Was: keys and sections outside [rom] were silently ignored, and `rom = 5` was
    // reported as "unknown key `rom` in [rom]".
    let dir = tempfile::tempdir().unwrap();
    let study = dir.path().join("s.toml");
    for (constants, line, field) in [
        ("alpha_0 = 0.2\n[rom]\nalpha_max = 0.5\n", 1, "alpha_0"),
        ("[rom]\nalpha_max = 0.5\n\n[fit]\nrms = 1.0\n", 4, "fit"),
        ("rom = 5\n", 1, "rom"),
        ("[[rom]]\nalpha_max = 0.5\n", 1, "rom"),
    ] {
        std::fs::write(dir.path().join("c.toml"), constants).unwrap();
        let e = Study::from_text(&study, &with_constants_file(), &[]);
        let (file, l, f, _, allowed) = input_parts(e.unwrap_err());
        assert_eq!(file, dir.path().join("c.toml"));
        assert_eq!((l, f.as_str()), (Some(line), field), "{constants}");
        assert!(allowed.contains("[rom]"), "{allowed}");
    }
    // Both accepted forms still load.
    for constants in ["alpha_max = 0.5\n", "[rom]\nalpha_max = 0.5\n"] {
        std::fs::write(dir.path().join("c.toml"), constants).unwrap();
        let (s, _) = Study::from_text(&study, &with_constants_file(), &[]).unwrap();
        assert_eq!(s.constants.alpha_max, 0.5);
    }
}

// ---------------------------------------------------------------------------------------------
// The binary, on a few shapes found here

#[test]
fn the_binary_exits_2_without_a_panic_on_fuzzed_shapes() {
    let dir = tempfile::tempdir().unwrap();
    let quick = demo_text("quick.toml");
    let shapes: Vec<(&str, String)> = vec![
        ("truncated.toml", quick[..quick.len() / 2].to_string()),
        (
            "nan.toml",
            quick.replacen("gap_mm = 0.5", "gap_mm = nan", 1),
        ),
        (
            "date.toml",
            quick.replacen("seed = 7", "seed = 1979-05-27", 1),
        ),
        ("header.toml", quick.replacen("[water]", "[[water]]", 1)),
        ("emptykey.toml", format!("\"\" = 1\n{quick}")),
        // Panicked in the model before subnormal numbers were refused.
        (
            "tiny.toml",
            quick.replacen("length_m = 0.45", "length_m = 1e-320", 1),
        ),
        ("eof.toml", "[study]\nname =".to_string()),
    ];
    for (name, text) in shapes {
        let p = dir.path().join(name);
        std::fs::write(&p, text).unwrap();
        let o = Command::new(env!("CARGO_BIN_EXE_stria"))
            .args(["check", p.to_str().unwrap()])
            .stdin(Stdio::null())
            .output()
            .expect("stria runs");
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{name}: {err}");
        assert!(!err.contains("panicked"), "{name}: {err}");
        assert!(
            err.contains(name) && err.contains("allowed"),
            "{name}: {err}"
        );
    }
}

#[test]
fn every_value_a_study_accepts_the_model_accepts() {
    // The key table's allowed ranges must lie inside the model's (model/src/validity.rs):
    // each end of every numeric design key's range (or its nearest admissible neighbour where
    // the end is open), set on the quick demo, either is refused by the study (another rule,
    // e.g. both feed forms given) or evaluates without the model refusing the input.
    let text = demo_text("quick.toml");
    // Variable bounds too: the design at every variable's lower, then upper, bound.
    let design_sections = ["water", "channel", "membranes", "operation", "economics"];
    let mut checked = 0;
    let mut refused = Vec::new();
    for spec in KEYS.iter() {
        let variable = spec.section.starts_with("variables.");
        if !(design_sections.contains(&spec.section) || variable)
            || !matches!(spec.kind, keys::Kind::Float)
        {
            continue;
        }
        let Some(r) = spec.range else { continue };
        let lo = if r.lo_open {
            // the smallest value above an open end that the study takes (no subnormals)
            if r.lo == 0.0 {
                f64::MIN_POSITIVE
            } else {
                r.lo.next_up()
            }
        } else {
            r.lo
        };
        let hi = if r.hi_open { r.hi.next_down() } else { r.hi };
        for v in [lo, hi] {
            let set = format!("{}.{}={v:e}", spec.section, spec.key);
            let Ok((study, _)) =
                Study::from_text(&study_path("quick.toml"), &text, std::slice::from_ref(&set))
            else {
                continue;
            };
            checked += 1;
            let lower: Vec<f64> = study.variables.iter().map(|v| v.lower).collect();
            let upper: Vec<f64> = study.variables.iter().map(|v| v.upper).collect();
            for x in [study.baseline_x(), lower, upper] {
                if let Err(e) = study.evaluate_point(&x) {
                    if e.contains("outside its physical range") {
                        refused.push(format!("--set {set}: {e}"));
                    }
                }
            }
        }
    }
    assert!(
        refused.is_empty(),
        "the study takes these, the model refuses them:\n{}",
        refused.join("\n")
    );
    assert!(checked > 40, "only {checked} range ends checked");
}

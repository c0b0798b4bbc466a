//! The house rule on function length: no function in a crate's `src/` over
//! [`MAX_LINES`] lines, except the ones listed in [`WAITING`] with the length they had when the
//! rule came in (they may shrink, not grow; split them and delete their row).

use std::path::{Path, PathBuf};

/// Longest function allowed, in lines from its `fn` line to its closing brace.
const MAX_LINES: usize = 150;

/// Functions longer than [`MAX_LINES`] when the rule came in: (file, name, their length then
/// rounded up to ten lines, so a one-line fix does not trip it).
const WAITING: &[(&str, &str, usize)] = &[
    ("studies/src/eval.rs", "design_sheet", 360),
    ("model/src/channel.rs", "integrate_once", 310),
    ("model/src/validity.rs", "check_design", 270),
    ("studies/src/handoff/case.rs", "build", 260),
    ("studies/src/fit/solve.rs", "fit", 240),
    ("studies/src/campaign/file.rs", "load", 230),
    ("studies/src/run/mod.rs", "run", 220),
    ("studies/src/fit/data.rs", "parse", 220),
    ("studies/src/handoff/geo.rs", "geo", 210),
    ("model/src/evaluate.rs", "evaluate", 200),
    ("studies/src/report/mod.rs", "design_figures", 170),
    ("model/src/plant.rs", "evaluate_plant", 160),
    ("studies/src/plant_sheet.rs", "sheet_sections", 160),
];

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    for e in entries.flatten() {
        let p = e.path();
        if p.is_dir() {
            rust_files(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

/// A line with string and character literals and `//` comments blanked, for brace counting.
fn code_of(line: &str) -> String {
    let mut out = String::new();
    let mut chars = line.chars().peekable();
    let mut in_str = false;
    while let Some(c) = chars.next() {
        if in_str {
            match c {
                '\\' => {
                    chars.next();
                }
                '"' => in_str = false,
                _ => {}
            }
            continue;
        }
        match c {
            '"' => in_str = true,
            '/' if chars.peek() == Some(&'/') => break,
            '\'' => {
                // a char literal such as '{' (a lifetime has no closing quote nearby)
                let rest: String = chars.clone().take(3).collect();
                if let Some(escaped) = rest.strip_prefix('\\') {
                    if let Some(k) = escaped.find('\'') {
                        for _ in 0..k + 2 {
                            chars.next();
                        }
                    }
                } else if rest.chars().nth(1) == Some('\'') {
                    chars.next();
                    chars.next();
                }
            }
            _ => out.push(c),
        }
    }
    out
}

/// (name, first line, length) of every function in a file.
fn functions(text: &str) -> Vec<(String, usize, usize)> {
    let lines: Vec<&str> = text.lines().collect();
    let mut found = Vec::new();
    for (i, line) in lines.iter().enumerate() {
        let t = line.trim_start();
        let t = t.strip_prefix("pub ").unwrap_or(t);
        let t = t
            .strip_prefix("pub(crate) ")
            .or_else(|| t.strip_prefix("pub(super) "))
            .unwrap_or(t);
        let t = t.strip_prefix("const ").unwrap_or(t);
        let Some(rest) = t.strip_prefix("fn ") else {
            continue;
        };
        let name: String = rest
            .chars()
            .take_while(|c| c.is_alphanumeric() || *c == '_')
            .collect();
        let (mut depth, mut opened) = (0i64, false);
        for (j, l) in lines.iter().enumerate().skip(i) {
            let code = code_of(l);
            for c in code.chars() {
                match c {
                    '{' => {
                        depth += 1;
                        opened = true;
                    }
                    '}' => depth -= 1,
                    _ => {}
                }
            }
            if opened && depth <= 0 {
                found.push((name.clone(), i + 1, j - i + 1));
                break;
            }
            if !opened && code.trim_end().ends_with(';') {
                break;
            }
        }
    }
    found
}

#[test]
fn no_function_in_src_is_over_the_limit() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("..");
    let mut files = Vec::new();
    for krate in ["model", "optimizer", "studies", "tests"] {
        rust_files(&root.join(krate).join("src"), &mut files);
    }
    files.sort();
    assert!(files.len() > 20, "found only {} source files", files.len());
    let mut over = Vec::new();
    for f in &files {
        let rel = f
            .strip_prefix(&root)
            .unwrap()
            .to_string_lossy()
            .replace('\\', "/");
        let text = std::fs::read_to_string(f).unwrap();
        for (name, line, n) in functions(&text) {
            if n <= MAX_LINES {
                continue;
            }
            match WAITING
                .iter()
                .find(|(file, f, _)| *file == rel && *f == name)
            {
                Some((_, _, then)) if n <= *then => {}
                Some((_, _, then)) => over.push(format!(
                    "{rel}:{line} {name}: {n} lines, grew from {then}; split it"
                )),
                None => over.push(format!(
                    "{rel}:{line} {name}: {n} lines (at most {MAX_LINES}); split it"
                )),
            }
        }
    }
    assert!(over.is_empty(), "{}", over.join("\n"));
}

#[test]
fn the_counter_sees_a_long_function() {
    let body = "    let x = '{';\n    // }\n    let s = \"}\";\n".repeat(60);
    let text = format!("pub fn long() {{\n{body}}}\nfn short() {{}}\n");
    let f = functions(&text);
    assert_eq!(f[0], ("long".to_string(), 1, 182));
    assert_eq!(f[1], ("short".to_string(), 183, 1));
}

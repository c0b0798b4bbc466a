//! The outputs in the programs their readers use: each hand-off card's `geometry.geo` meshed
//! by Gmsh, and the report rendered by headless Chromium (the Debian packages `gmsh` and
//! `chromium`, installed by `.ci/run`).
//!
//! A missing program fails these tests. A developer without it opts out explicitly with
//! `STRIA_NO_GMSH=1` or `STRIA_NO_CHROMIUM=1` (DEVELOPERS.md); CI (`CI` set) ignores those.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

use serde_json::Value;

fn stria_in(dir: &Path, args: &[&str]) -> Output {
    let o = Command::new(env!("CARGO_BIN_EXE_stria"))
        .args(args)
        .current_dir(dir)
        .stdin(Stdio::null())
        .output()
        .expect("stria runs");
    assert_eq!(
        o.status.code(),
        Some(0),
        "stria {args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    o
}

/// A short run of the quick demo (two generations of 40) in `dir/runs/quick`; its front's ids.
fn quick_run(dir: &Path) -> Vec<u64> {
    let quick = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo/quick.toml");
    stria_in(
        dir,
        &[
            "run",
            quick.to_str().unwrap(),
            "--out",
            "runs/quick",
            "--max-evals",
            "80",
        ],
    );
    std::fs::read_to_string(dir.join("runs/quick/front.csv"))
        .unwrap()
        .lines()
        .skip(1)
        .map(|l| l.split(',').next().unwrap().parse().unwrap())
        .collect()
}

/// The program `names[0]` (or an alternative name) on the PATH; None when the developer opted
/// out with `opt_out=1`; a failure when it is missing otherwise.
fn program(names: &[&str], opt_out: &str, package: &str) -> Option<PathBuf> {
    let ci = std::env::var("CI").is_ok_and(|v| !v.is_empty());
    if std::env::var(opt_out).is_ok_and(|v| v == "1") && !ci {
        eprintln!("{opt_out}=1: skipped by request (CI runs it)");
        return None;
    }
    let path = std::env::var_os("PATH").unwrap_or_default();
    for name in names {
        for dir in std::env::split_paths(&path) {
            let p = dir.join(name);
            if p.is_file() {
                return Some(p);
            }
        }
    }
    panic!(
        "{} is not on the PATH: install Debian's {package} (apt-get install -y \
         --no-install-recommends {package}, as .ci/run does), or set {opt_out}=1 to skip this \
         test on purpose",
        names[0]
    );
}

/// Run a command with a time limit (a hung browser must not hang the suite).
fn run_limited(cmd: &mut Command, limit: Duration) -> Output {
    let child = cmd
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the program starts");
    let id = child.id();
    let (tx, rx) = std::sync::mpsc::channel();
    std::thread::spawn(move || {
        let _ = tx.send(child.wait_with_output());
    });
    match rx.recv_timeout(limit) {
        Ok(out) => out.expect("the program ran"),
        Err(_) => {
            let _ = Command::new("kill").arg(id.to_string()).status();
            panic!("{cmd:?} took more than {} s", limit.as_secs());
        }
    }
}

/// A mesh in Gmsh's MSH 2 ASCII format: physical names by tag, node coordinates, and
/// elements as (type, physical tag, nodes).
struct Msh {
    names: BTreeMap<u64, (u64, String)>,
    nodes: BTreeMap<u64, [f64; 2]>,
    elements: Vec<(u64, u64, Vec<u64>)>,
}

fn read_msh(text: &str) -> Msh {
    let mut names = BTreeMap::new();
    let mut nodes = BTreeMap::new();
    let mut elements = Vec::new();
    let mut lines = text.lines();
    while let Some(line) = lines.next() {
        match line.trim() {
            "$MeshFormat" => {
                let v = lines.next().unwrap();
                assert!(v.starts_with("2."), "not MSH 2: {v}");
            }
            "$PhysicalNames" => {
                let n: usize = lines.next().unwrap().trim().parse().unwrap();
                for _ in 0..n {
                    let l = lines.next().unwrap();
                    let mut w = l.splitn(3, ' ');
                    let dim: u64 = w.next().unwrap().parse().unwrap();
                    let tag: u64 = w.next().unwrap().parse().unwrap();
                    let name = w.next().unwrap().trim_matches('"').to_string();
                    names.insert(tag, (dim, name));
                }
            }
            "$Nodes" => {
                let n: usize = lines.next().unwrap().trim().parse().unwrap();
                for _ in 0..n {
                    let v: Vec<f64> = lines
                        .next()
                        .unwrap()
                        .split_whitespace()
                        .map(|x| x.parse().unwrap())
                        .collect();
                    nodes.insert(v[0] as u64, [v[1], v[2]]);
                }
            }
            "$Elements" => {
                let n: usize = lines.next().unwrap().trim().parse().unwrap();
                for _ in 0..n {
                    let v: Vec<u64> = lines
                        .next()
                        .unwrap()
                        .split_whitespace()
                        .map(|x| x.parse().unwrap())
                        .collect();
                    let ntags = v[2] as usize;
                    elements.push((v[1], v[3], v[3 + ntags..].to_vec()));
                }
            }
            _ => {}
        }
    }
    Msh {
        names,
        nodes,
        elements,
    }
}

fn num(v: &Value, path: &str) -> f64 {
    path.split('.')
        .fold(v, |v, k| &v[k])
        .as_f64()
        .unwrap_or_else(|| panic!("no number at {path}"))
}

/// Total length of the line elements of a physical group.
fn group_length(m: &Msh, tag: u64) -> f64 {
    m.elements
        .iter()
        .filter(|(t, p, _)| *t == 1 && *p == tag)
        .map(|(_, _, n)| {
            let (a, b) = (m.nodes[&n[0]], m.nodes[&n[1]]);
            (a[0] - b[0]).hypot(a[1] - b[1])
        })
        .sum()
}

#[test]
fn gmsh_meshes_every_demo_card_with_its_named_boundaries_and_estimated_size() {
    let Some(gmsh) = program(&["gmsh"], "STRIA_NO_GMSH", "gmsh") else {
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let ids = quick_run(dir.path());
    let mut args = vec!["handoff".to_string(), "runs/quick".into()];
    for id in ids.iter().take(2) {
        args.push("--pick".into());
        args.push(id.to_string());
    }
    stria_in(
        dir.path(),
        &args.iter().map(String::as_str).collect::<Vec<_>>(),
    );
    let handoff = dir.path().join("runs/quick/handoff");
    let mut cards: Vec<PathBuf> = std::fs::read_dir(&handoff)
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    cards.sort();
    assert_eq!(cards.len(), 2 * ids.len().min(2));
    for card_dir in &cards {
        let card: Value =
            serde_json::from_str(&std::fs::read_to_string(card_dir.join("case.json")).unwrap())
                .unwrap();
        let t0 = Instant::now();
        let out = run_limited(
            Command::new(&gmsh)
                .args(["-2", "-format", "msh2", "geometry.geo", "-o", "mesh.msh"])
                .current_dir(card_dir),
            Duration::from_secs(300),
        );
        let log = String::from_utf8_lossy(&out.stdout).into_owned()
            + &String::from_utf8_lossy(&out.stderr);
        assert!(
            out.status.success() && !log.contains("Error"),
            "{}: gmsh failed:\n{log}",
            card_dir.display()
        );
        let msh = read_msh(&std::fs::read_to_string(card_dir.join("mesh.msh")).unwrap());
        let seconds = t0.elapsed().as_secs_f64();

        // the physical groups: every boundary kind of the card, and the fluid
        let tag_of = |name: &str, dim: u64| {
            msh.names
                .iter()
                .find(|(_, (d, n))| n == name && *d == dim)
                .map(|(t, _)| *t)
                .unwrap_or_else(|| panic!("{}: no physical group {name}", card_dir.display()))
        };
        let unpatterned = card["unpatterned_reference"].as_bool().unwrap();
        let mut kinds = vec!["inflow", "outflow", "conducting_stripes", "opposite_wall"];
        if !unpatterned {
            kinds.push("inert_stripes");
        }
        let gap = num(&card, "geometry.gap_m");
        let window = num(&card, "geometry.window_length_m");
        let stripes = |key: &str| -> f64 {
            card["geometry"][key]
                .as_array()
                .unwrap()
                .iter()
                .map(|s| s[1].as_f64().unwrap() - s[0].as_f64().unwrap())
                .sum()
        };
        for kind in &kinds {
            let tag = tag_of(kind, 1);
            // each boundary's meshed length is the card's (relative 1e-9: node coordinates
            // are written with 16 digits)
            let want = match *kind {
                "inflow" | "outflow" => gap,
                "opposite_wall" => window,
                "conducting_stripes" => stripes("conducting_stripes_m"),
                _ => stripes("inert_stripes_m"),
            };
            let got = group_length(&msh, tag);
            assert!(
                (got - want).abs() <= 1e-9 * want,
                "{}: {kind} is {got} m long, the card says {want} m",
                card_dir.display()
            );
        }
        let fluid = tag_of("fluid", 2);
        let cells = msh
            .elements
            .iter()
            .filter(|(t, p, _)| (*t == 2 || *t == 3) && *p == fluid)
            .count() as f64;
        let estimate = num(&card, "mesh.estimated_cells");
        let ratio = cells / estimate;
        // the first wall-normal spacing at the membrane is the card's
        let first = num(&card, "mesh.wall_normal_first_spacing_m");
        let lowest = msh
            .nodes
            .values()
            .map(|p| p[1])
            .filter(|&y| y > 0.0)
            .fold(f64::INFINITY, f64::min);
        eprintln!(
            "{}: gmsh {seconds:.1} s, {cells} cells against the card's {estimate} \
             (ratio {ratio:.3}), first spacing {lowest:.3e} m against {first:.3e} m",
            card_dir.file_name().unwrap().to_string_lossy()
        );
        assert!(
            (0.5..=2.0).contains(&ratio),
            "{}: {cells} cells, the card estimates {estimate}",
            card_dir.display()
        );
        assert!(
            (lowest / first - 1.0).abs() < 0.01,
            "first spacing {lowest} vs {first}"
        );
    }
}

/// Put first into the page's head: records console errors and warnings, script errors and
/// resources that fail to load, before anything of the page runs.
const HOOK: &str = r#"<script>
window.__stria = { console: [], errors: [] };
(function () {
  ["error", "warn"].forEach(function (k) {
    var original = console[k];
    console[k] = function () {
      window.__stria.console.push(k + ": " + Array.prototype.join.call(arguments, " "));
      return original.apply(console, arguments);
    };
  });
  window.addEventListener("error", function (e) {
    var t = e.target;
    if (t && t !== window && (t.src || t.href)) {
      window.__stria.errors.push("failed to load " + (t.src || t.href));
    } else {
      window.__stria.errors.push("script error: " + e.message);
    }
  }, true);
})();
</script>"#;

/// What the browser measured in the page once loaded: each inline `<svg>`'s size and element
/// count, each `<img>`'s state, the page height, and what [`HOOK`] recorded.
const PROBE: &str = r#"<script>
window.addEventListener("load", function () {
  var r = { svgs: [], imgs: [], height: document.documentElement.scrollHeight,
            console: window.__stria.console, errors: window.__stria.errors };
  document.querySelectorAll("svg").forEach(function (s) {
    var b = s.getBoundingClientRect();
    r.svgs.push([b.width, b.height, s.querySelectorAll("*").length]);
  });
  document.querySelectorAll("img").forEach(function (i) {
    r.imgs.push([i.getAttribute("src"), i.complete, i.naturalWidth]);
  });
  var p = document.createElement("pre");
  p.id = "stria-probe";
  p.textContent = JSON.stringify(r);
  document.body.appendChild(p);
});
</script>"#;

/// Chromium's flags for a quiet headless run with a fresh profile.
fn chromium(browser: &Path, profile: &Path) -> Command {
    let mut c = Command::new(browser);
    c.args([
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--hide-scrollbars",
    ])
    .arg(format!("--user-data-dir={}", profile.display()));
    c
}

/// What the browser found wrong with a page: broken images, empty figures, console messages
/// (the report has no scripts, so any console message is an error of the page); and its
/// height in CSS pixels.
fn browser_problems(browser: &Path, page: &Path, shot: &Path) -> (Vec<String>, u64) {
    let mut problems = Vec::new();
    // a fresh profile for every start
    let scratch = tempfile::tempdir().unwrap();
    let scratch = scratch.path();
    // 1. the probe, in a copy of the page
    let html = std::fs::read_to_string(page).unwrap();
    let probe_page = page.with_file_name("probe.html");
    let probed = html
        .replacen("<head>", &format!("<head>{HOOK}"), 1)
        .replacen("</body>", &format!("{PROBE}</body>"), 1);
    assert!(probed.contains(HOOK), "{} has no <head>", page.display());
    std::fs::write(&probe_page, probed).unwrap();
    let out = run_limited(
        chromium(browser, &scratch.join("profile-probe"))
            .arg("--dump-dom")
            .arg(format!("file://{}", probe_page.display())),
        Duration::from_secs(120),
    );
    std::fs::remove_file(&probe_page).unwrap();
    let dom = String::from_utf8_lossy(&out.stdout).into_owned();
    let start = dom.find("<pre id=\"stria-probe\">").unwrap_or_else(|| {
        panic!(
            "the probe did not run; stderr:\n{}",
            String::from_utf8_lossy(&out.stderr)
        )
    });
    let json = &dom[start + "<pre id=\"stria-probe\">".len()..];
    let json = json[..json.find("</pre>").unwrap()]
        .replace("&quot;", "\"")
        .replace("&amp;", "&");
    let r: Value = serde_json::from_str(&json).unwrap();
    let in_source = html.matches("<svg").count();
    let svgs = r["svgs"].as_array().unwrap();
    if svgs.len() != in_source {
        problems.push(format!(
            "{} <svg> in the page, {} in the browser's DOM",
            in_source,
            svgs.len()
        ));
    }
    for (k, s) in svgs.iter().enumerate() {
        let (w, h, n) = (
            s[0].as_f64().unwrap(),
            s[1].as_f64().unwrap(),
            s[2].as_u64().unwrap(),
        );
        if w < 1.0 || h < 1.0 || n == 0 {
            problems.push(format!(
                "figure {k} renders empty ({w} x {h} px, {n} elements)"
            ));
        }
    }
    for i in r["imgs"].as_array().unwrap() {
        if !(i[1].as_bool() == Some(true) && i[2].as_u64().unwrap_or(0) > 0) {
            problems.push(format!("image {} is broken", i[0].as_str().unwrap_or("?")));
        }
    }
    for key in ["console", "errors"] {
        for m in r[key].as_array().unwrap() {
            problems.push(format!("{key}: {}", m.as_str().unwrap_or("?")));
        }
    }
    let height = r["height"].as_u64().unwrap_or(2000).clamp(600, 16_000);
    // 2. the page itself: screenshot of its whole height, and its console
    let out = run_limited(
        chromium(browser, &scratch.join("profile-shot"))
            .args(["--enable-logging=stderr", "--v=0"])
            .arg(format!("--window-size=1280,{height}"))
            .arg(format!("--screenshot={}", shot.display()))
            .arg(format!("file://{}", page.display())),
        Duration::from_secs(120),
    );
    let log = String::from_utf8_lossy(&out.stderr);
    for line in log.lines() {
        if line.contains(":CONSOLE") {
            problems.push(format!("console (browser log): {line}"));
        }
    }
    if std::env::var("STRIA_CHROMIUM_LOG").is_ok() {
        eprintln!("{log}");
    }
    if !shot.is_file() {
        problems.push("no screenshot".into());
    }
    (problems, height)
}

#[test]
fn the_report_renders_in_headless_chromium_without_broken_figures_or_errors() {
    let Some(browser) = program(
        &["chromium", "chromium-browser"],
        "STRIA_NO_CHROMIUM",
        "chromium",
    ) else {
        return;
    };
    let t0 = Instant::now();
    let dir = tempfile::tempdir().unwrap();
    quick_run(dir.path());
    stria_in(dir.path(), &["report", "runs/quick"]);
    let report_dir = dir.path().join("runs/quick/report");
    let page = report_dir.join("report.html");
    // every figure file and every inlined figure parses as XML
    let html = std::fs::read_to_string(&page).unwrap();
    let mut files = 0;
    for e in std::fs::read_dir(&report_dir).unwrap() {
        let p = e.unwrap().path();
        if p.extension().is_some_and(|x| x == "svg") {
            files += 1;
            let text = std::fs::read_to_string(&p).unwrap();
            roxmltree::Document::parse(&text).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
        }
    }
    let mut rest = html.as_str();
    let mut inline = 0;
    while let Some(i) = rest.find("<svg") {
        let end = rest[i..].find("</svg>").expect("closed svg") + i + "</svg>".len();
        roxmltree::Document::parse(&rest[i..end]).unwrap();
        inline += 1;
        rest = &rest[end..];
    }
    assert!(
        files >= 5 && inline == files,
        "{files} figure files, {inline} inlined"
    );

    // the artefact: kept under the target directory for CI to show
    let target = Path::new(env!("CARGO_BIN_EXE_stria"))
        .ancestors()
        .nth(2)
        .unwrap()
        .join("ci-artifacts");
    std::fs::create_dir_all(&target).unwrap();
    let shot = target.join("report.png");
    let _ = std::fs::remove_file(&shot);
    let scratch = tempfile::tempdir().unwrap();
    let (problems, height) = browser_problems(&browser, &page, &shot);
    assert!(
        problems.is_empty(),
        "the report in Chromium:\n{}",
        problems.join("\n")
    );
    let png = std::fs::read(&shot).unwrap();
    assert!(
        png.starts_with(b"\x89PNG") && png.len() > 10_000,
        "{} bytes",
        png.len()
    );
    eprintln!(
        "report rendered by {} in {:.1} s ({inline} figures, page {height} px); screenshot {}",
        browser.display(),
        t0.elapsed().as_secs_f64(),
        shot.display()
    );

    // the check itself catches what it is for: a broken image, an empty figure, a console error
    let bad = scratch.path().join("bad.html");
    std::fs::write(
        &bad,
        "<!DOCTYPE html><html><head></head><body><img src=\"missing.png\">\
         <svg width=\"0\" height=\"0\"></svg>\
         <script>console.error(\"broken on purpose\");</script></body></html>",
    )
    .unwrap();
    let (found, _) = browser_problems(&browser, &bad, &scratch.path().join("bad.png"));
    let all = found.join("\n");
    for expected in [
        "image missing.png is broken",
        "errors: failed to load file://",
        "renders empty",
        "console: error: broken on purpose",
    ] {
        assert!(
            all.contains(expected),
            "the check missed `{expected}`:\n{all}"
        );
    }
}

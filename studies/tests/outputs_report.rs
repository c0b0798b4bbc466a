//! `stria report`: the page and figures are produced, every SVG parses as XML, the page refers
//! to nothing it does not embed, and it shows the numbers of front.csv.

mod outputs_support;
use outputs_support as fixture;

use std::time::Instant;

use studies::report;

/// Every `<svg ...>...</svg>` block of the page.
fn svg_blocks(html: &str) -> Vec<&str> {
    let mut out = Vec::new();
    let mut rest = html;
    while let Some(i) = rest.find("<svg") {
        let end = rest[i..].find("</svg>").expect("closed svg") + i + "</svg>".len();
        out.push(&rest[i..end]);
        rest = &rest[end..];
    }
    out
}

fn check_self_contained(html: &str) {
    let lower = html.to_lowercase();
    for bad in [
        "src=", "href=", "<script", "<link", "@import", "url(", "<iframe", "<img",
    ] {
        assert!(
            !lower.contains(bad),
            "page refers to something outside it: {bad}"
        );
    }
    // the only URL allowed is the SVG namespace name, which is not fetched
    let urls = lower.matches("http").count();
    let ns = lower
        .matches("xmlns=\"http://www.w3.org/2000/svg\"")
        .count();
    assert_eq!(urls, ns, "a URL other than the SVG namespace");
}

#[test]
fn report_page_and_figures_are_valid_self_contained_and_show_the_front() {
    let dir = tempfile::tempdir().unwrap();
    let ids = fixture::write_run(
        dir.path(),
        &["salt_removal_rate", "specific_energy", "levelised_cost"],
    );
    let t0 = Instant::now();
    report::run(dir.path()).unwrap();
    eprintln!("report generated in {:.3} s", t0.elapsed().as_secs_f64());
    let out = dir.path().join("report");
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();

    // figures: three objective pairs, hypervolume, current-voltage, three profiles, a pattern each
    let svgs: Vec<_> = std::fs::read_dir(&out)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "svg"))
        .collect();
    let names: Vec<String> = svgs
        .iter()
        .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
        .collect();
    for expected in [
        "hypervolume.svg",
        "iv_curves.svg",
        "profile_concentration.svg",
        "profile_current.svg",
    ] {
        assert!(
            names.iter().any(|n| n == expected),
            "{expected} missing from {names:?}"
        );
    }
    assert_eq!(
        names.iter().filter(|n| n.starts_with("front_")).count(),
        3,
        "{names:?}"
    );
    assert!(names.iter().any(|n| n.starts_with("pattern_")), "{names:?}");
    for p in &svgs {
        let text = std::fs::read_to_string(p).unwrap();
        roxmltree::Document::parse(&text).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
    }
    // every figure is inlined and each inlined block is well-formed XML
    let blocks = svg_blocks(&html);
    assert_eq!(blocks.len(), svgs.len());
    for b in &blocks {
        roxmltree::Document::parse(b).unwrap();
    }
    check_self_contained(&html);
    // the unpatterned reference is marked on the fronts, terms are defined, the caution is there
    assert!(
        blocks
            .iter()
            .filter(|b| b.contains("unpatterned reference"))
            .count()
            >= 3
    );
    assert!(html.contains("screening model") && html.contains("licensed practice"));
    assert!(html.contains("active-area fraction: the share of the patterned membrane"));
    // "baseline" means the study's baseline design only, never the unpatterned reference
    for (at, _) in html.match_indices("baseline") {
        assert!(
            html[at..].starts_with("baseline design"),
            "`baseline` not as `baseline design`: ...{}...",
            &html[at.saturating_sub(60)..(at + 60).min(html.len())]
        );
    }

    // the front table shows every number of front.csv: the exact text as the cell's title and a
    // 4-significant-figure rendering within half a unit of the 4th figure
    let front = std::fs::read_to_string(dir.path().join("front.csv")).unwrap();
    let mut lines = front.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    for h in &header {
        assert!(html.contains(&format!("<th>{h}</th>")), "column {h}");
    }
    let mut rows = 0;
    for line in lines {
        rows += 1;
        for cell in line.split(',') {
            let key = format!("<td title=\"{cell}\">");
            let at = html
                .find(&key)
                .unwrap_or_else(|| panic!("{cell} not in the page"));
            let shown = &html[at + key.len()..];
            let shown = &shown[..shown.find("</td>").unwrap()];
            if let (Ok(exact), Ok(s)) = (cell.parse::<f64>(), shown.parse::<f64>()) {
                assert!(
                    (s - exact).abs() <= 5e-4 * exact.abs() + 1e-300,
                    "{cell} shown as {shown}"
                );
            } else {
                assert_eq!(shown, cell);
            }
        }
    }
    assert_eq!(rows, ids.len());
}

#[test]
fn two_objectives_are_coloured_by_the_active_area_fraction() {
    let dir = tempfile::tempdir().unwrap();
    fixture::write_run(dir.path(), &["salt_removal_rate", "specific_energy"]);
    let run = studies::rundir::read(dir.path()).unwrap();
    let r = report::build(&run).unwrap();
    let fronts: Vec<_> = r
        .sections
        .iter()
        .flat_map(|s| s.2.iter())
        .filter(|f| f.file.starts_with("front_"))
        .collect();
    assert_eq!(fronts.len(), 1);
    assert!(fronts[0].svg.contains("active-area fraction"));
    check_self_contained(&r.html);
}

#[test]
fn an_unfinished_run_is_reported_as_such() {
    let dir = tempfile::tempdir().unwrap();
    fixture::write_run(dir.path(), &["salt_removal_rate", "specific_energy"]);
    let finished = report::build(&studies::rundir::read(dir.path()).unwrap()).unwrap();
    assert!(!finished.html.contains("has not finished"));
    let path = dir.path().join("summary.json");
    let text = std::fs::read_to_string(&path)
        .unwrap()
        .replace("\"finished\":true", "\"finished\":false");
    assert!(text.contains("\"finished\":false"), "{text}");
    std::fs::write(&path, text).unwrap();
    let paused = report::build(&studies::rundir::read(dir.path()).unwrap()).unwrap();
    assert!(paused.html.contains("This run has not finished"));
    assert!(paused.html.contains("to resume it"));
}

#[test]
fn a_directory_that_is_not_a_run_is_a_clear_input_error() {
    let dir = tempfile::tempdir().unwrap();
    let e = report::run(dir.path()).unwrap_err();
    assert_eq!(e.exit_code(), 2);
    assert!(e.to_string().contains("study.toml"), "{e}");
}

//! The report page: one HTML file with every figure inlined as SVG, no scripts, no external
//! style sheets, images or links.

use std::fmt::Write;

use model::Evaluation;

use super::{Chosen, Figure};
use crate::figures::fmt_num;
use crate::rundir::RunDir;
use crate::CAUTION;

/// Escape text for HTML.
pub fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// An SVG document ready to inline (any XML declaration dropped).
fn inline_svg(svg: &str) -> &str {
    match svg.find("<svg") {
        Some(i) => &svg[i..],
        None => svg,
    }
}

const STYLE: &str = "body{font-family:sans-serif;max-width:1100px;margin:1em auto;padding:0 1em;color:#222}\
h1{font-size:1.5em}h2{font-size:1.2em;border-bottom:1px solid #ccc;margin-top:1.6em}\
table{border-collapse:collapse;font-size:0.85em}td,th{border:1px solid #ccc;padding:2px 6px;text-align:right}\
th{background:#f0f0f0}td.l,th.l{text-align:left}.caution{border:2px solid #b00;background:#fff4f4;padding:0.6em 1em}\
figure{margin:1em 0}figcaption{font-size:0.9em;color:#444;max-width:720px}.scroll{overflow-x:auto}";

fn summary_rows(run: &RunDir) -> Vec<(String, String)> {
    let mut rows = vec![(
        "study file".to_string(),
        run.study.file.display().to_string(),
    )];
    if let serde_json::Value::Object(m) = &run.summary {
        for key in [
            "fingerprint",
            "algorithm",
            "seed",
            "evaluations",
            "generations",
            "stop_reason",
            "front_size",
            "finished",
            "evaluations_csv_cap",
        ] {
            if let Some(v) = m.get(key) {
                let text = match v {
                    serde_json::Value::String(s) => s.clone(),
                    other => other.to_string(),
                };
                rows.push((key.replace('_', " "), text));
            }
        }
    } else {
        rows.push((
            "summary".into(),
            "summary.json missing or unreadable".into(),
        ));
    }
    rows
}

fn diag_row(label: &str, why: &str, e: &Evaluation) -> String {
    let p = &e.performance;
    format!(
        "<tr><td class=\"l\">{}</td><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
        esc(label),
        esc(why),
        fmt_num(e.inputs.pitch_m * 1e6),
        fmt_num(e.inputs.open_fraction),
        fmt_num(e.inputs.velocity_m_s * 100.0),
        fmt_num(p.mean_current_density_A_m2),
        fmt_num(p.outlet_concentration_mol_m3),
        fmt_num(p.specific_energy_kWh_m3),
        fmt_num(p.active_area_fraction),
        p.vortex_wavelength_m.map(|l| fmt_num(l * 1e6)).unwrap_or_else(|| "none".into()),
    )
}

/// The words the page uses in one sense only.
fn terms() -> String {
    format!(
        "The baseline design is the design written in the study file. The unpatterned \
         reference is the study's baseline design with an unpatterned membrane (open fraction 1) \
         at the same operating point; each chosen design also has its own unpatterned twin. The \
         {}.",
        crate::eval::ACTIVE_AREA_MEANING
    )
}

/// The page.
pub fn page(
    run: &RunDir,
    sections: &[(String, String, Vec<Figure>)],
    chosen: &[Chosen],
    baseline: Option<&Evaluation>,
    notes: &[String],
) -> String {
    let mut h = String::new();
    let title = format!("stria report: {}", run.study.name);
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>{}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n<h1>{}</h1>\n",
        esc(&title),
        esc(&title)
    );
    if !run.study.description.is_empty() {
        let _ = writeln!(h, "<p>{}</p>", esc(&run.study.description));
    }
    let _ = writeln!(
        h,
        "<div class=\"caution\"><strong>Screening model.</strong> {}</div>",
        esc(CAUTION)
    );
    h.push_str("<h2>Run</h2>\n<table>\n");
    for (k, v) in summary_rows(run) {
        let _ = writeln!(
            h,
            "<tr><th class=\"l\">{}</th><td class=\"l\">{}</td></tr>",
            esc(&k),
            esc(&v)
        );
    }
    h.push_str("</table>\n");
    let _ = writeln!(
        h,
        "<p class=\"terms\"><strong>Terms.</strong> {}</p>",
        esc(&terms())
    );
    for n in notes {
        let _ = writeln!(h, "<p><strong>Note:</strong> {}</p>", esc(n));
    }
    for (title, intro, figs) in sections {
        let _ = writeln!(h, "<h2>{}</h2>", esc(title));
        if !intro.is_empty() {
            let _ = writeln!(h, "<p>{}</p>", esc(intro));
        }
        for f in figs {
            let _ = writeln!(
                h,
                "<figure>\n{}\n<figcaption>{} (also saved as {})</figcaption>\n</figure>",
                inline_svg(&f.svg),
                esc(&f.caption),
                esc(&f.file)
            );
        }
    }
    if !chosen.is_empty() || baseline.is_some() {
        h.push_str("<h2>Key diagnostics of the chosen designs</h2>\n<table>\n<tr><th class=\"l\">design</th><th class=\"l\">chosen as</th><th>pitch (um)</th><th>open fraction</th><th>velocity (cm/s)</th><th>mean current density (A/m^2)</th><th>outlet concentration (mol/m^3)</th><th>specific energy (kWh/m^3)</th><th>active-area fraction</th><th>vortex wavelength (um)</th></tr>\n");
        if let Some(e) = baseline {
            h.push_str(&diag_row(
                "unpatterned reference",
                "the study's baseline design, open fraction 1",
                e,
            ));
        }
        for c in chosen {
            h.push_str(&diag_row(&format!("design {}", c.id), &c.why, &c.eval));
        }
        h.push_str("</table>\n");
    }
    let _ = writeln!(
        h,
        "<h2>The front ({} designs, from front.csv)</h2>\n<p>Numbers to 4 significant figures; hover a cell for the exact value written in front.csv. Objectives in their natural direction.</p>\n<div class=\"scroll\"><table id=\"front\">",
        run.front.rows.len()
    );
    h.push_str("<tr>");
    for c in &run.front.columns {
        let _ = write!(h, "<th>{}</th>", esc(c));
    }
    h.push_str("</tr>\n");
    for r in &run.front.rows {
        h.push_str("<tr>");
        for (k, raw) in r.raw.iter().enumerate() {
            let shown = if k == 0 || !r.values[k].is_finite() {
                raw.clone()
            } else {
                fmt_num(r.values[k])
            };
            let _ = write!(h, "<td title=\"{}\">{}</td>", esc(raw), esc(&shown));
        }
        h.push_str("</tr>\n");
    }
    h.push_str("</table></div>\n");
    let _ = writeln!(
        h,
        "<h2>Caution</h2>\n<p>{}</p>\n<p>Written by stria report from the run directory {}. The figures are also saved beside this page as SVG files.</p>\n</body>\n</html>",
        esc(CAUTION),
        esc(&run.dir.display().to_string())
    );
    h
}

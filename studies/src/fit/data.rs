//! The current-voltage data `stria fit` reads.
//!
//! One CSV row per measured or simulated point. Lines starting with `#` are comments (use them
//! to say where the data came from). Columns (header names exact, any order):
//!
//! | column | required | meaning |
//! |---|---|---|
//! | `curve` | yes | a label; rows with the same label form one current-voltage curve |
//! | `layer_voltage_V` | yes | diffusion-layer voltage across one diluate-side interface of the study's patterned membrane (the CEM; the AEM when the study patterns only the AEM), V: the potential of the electroneutral bulk at the outer edge of the diffusion layer minus that of the membrane just inside its surface (the membrane's own ohmic drop excluded), as the hand-off case applies it |
//! | `current_density_A_m2` | yes | time- and window-averaged current density, A per m^2 of membrane (conducting and inert stripes together), >= 0 |
//! | `concentration_mol_m3` | no | bulk salt concentration at the window, mol/m^3 |
//! | `velocity_m_s` | no | mean channel velocity, m/s |
//! | `pitch_m` | no | stripe pitch, m |
//! | `open_fraction` | no | conducting share of each pitch, (0, 1] (1 = unpatterned) |
//! | `gap_m` | no | channel gap, m |
//! | `temperature_K` | no | temperature, K |
//! | `position_m` | no | distance of the window from the channel inlet, m |
//!
//! A missing optional column, or an empty cell in it, is taken from the study (and reported).

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use crate::error::CliError;

/// Required columns.
pub const REQUIRED: [&str; 3] = ["curve", "layer_voltage_V", "current_density_A_m2"];

/// Optional condition columns, each with its allowed range in words.
pub const CONDITIONS: [(&str, &str); 7] = [
    ("concentration_mol_m3", "a number > 0 (mol/m^3)"),
    ("velocity_m_s", "a number > 0 (m/s)"),
    ("pitch_m", "a number > 0 (m)"),
    ("open_fraction", "a number in (0, 1]"),
    ("gap_m", "a number > 0 (m)"),
    ("temperature_K", "a number from 273.15 to 373.15 (K)"),
    ("position_m", "a number >= 0 (m)"),
];

/// The conditions of one data point; `None` = not given, taken from the study.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct PointConditions {
    /// mol/m^3.
    pub concentration_mol_m3: Option<f64>,
    /// m/s.
    pub velocity_m_s: Option<f64>,
    /// m.
    pub pitch_m: Option<f64>,
    /// -.
    pub open_fraction: Option<f64>,
    /// m.
    pub gap_m: Option<f64>,
    /// K.
    pub temperature_k: Option<f64>,
    /// m.
    pub position_m: Option<f64>,
}

impl PointConditions {
    fn set(&mut self, column: &str, value: f64) {
        let slot = match column {
            "concentration_mol_m3" => &mut self.concentration_mol_m3,
            "velocity_m_s" => &mut self.velocity_m_s,
            "pitch_m" => &mut self.pitch_m,
            "open_fraction" => &mut self.open_fraction,
            "gap_m" => &mut self.gap_m,
            "temperature_K" => &mut self.temperature_k,
            "position_m" => &mut self.position_m,
            _ => unreachable!("column list and setter agree"),
        };
        *slot = Some(value);
    }
}

/// One measured or simulated point.
#[derive(Debug, Clone, PartialEq)]
pub struct DataPoint {
    /// Curve label.
    pub curve: String,
    /// 1-based line in the file (for messages).
    pub line: usize,
    /// Diffusion-layer voltage, V.
    pub layer_voltage_v: f64,
    /// Current density, A/m^2.
    pub current_density_a_m2: f64,
    /// Conditions given in the file.
    pub conditions: PointConditions,
}

/// The whole data set.
#[derive(Debug, Clone, PartialEq)]
pub struct DataSet {
    /// The file read.
    pub file: PathBuf,
    /// Points in file order.
    pub points: Vec<DataPoint>,
    /// Condition columns absent from the header or left empty somewhere: column -> number of
    /// rows that take the value from the study.
    pub from_study: BTreeMap<String, usize>,
}

impl DataSet {
    /// Curve labels in order of first appearance.
    pub fn curves(&self) -> Vec<String> {
        self.curve_groups().into_iter().map(|(c, _)| c).collect()
    }

    /// Each curve (in order of first appearance) with the indices of its points, in one pass.
    pub fn curve_groups(&self) -> Vec<(String, Vec<usize>)> {
        let mut at: std::collections::HashMap<&str, usize> = std::collections::HashMap::new();
        let mut out: Vec<(String, Vec<usize>)> = Vec::new();
        for (k, p) in self.points.iter().enumerate() {
            let g = *at.entry(p.curve.as_str()).or_insert_with(|| {
                out.push((p.curve.clone(), Vec::new()));
                out.len() - 1
            });
            out[g].1.push(k);
        }
        out
    }
}

fn allowed_for(column: &str) -> &'static str {
    match column {
        "layer_voltage_V" => "a number >= 0 (V)",
        "current_density_A_m2" => "a number >= 0 (A/m^2)",
        "curve" => "a non-empty label",
        _ => CONDITIONS
            .iter()
            .find(|(c, _)| *c == column)
            .map(|(_, a)| *a)
            .unwrap_or(""),
    }
}

fn in_range(column: &str, v: f64) -> bool {
    match column {
        "layer_voltage_V" | "current_density_A_m2" | "position_m" => v >= 0.0,
        "open_fraction" => v > 0.0 && v <= 1.0,
        "temperature_K" => (273.15..=373.15).contains(&v),
        _ => v > 0.0,
    }
}

/// Most data rows one fit takes (each Nelder-Mead step solves the interface at every point,
/// about 2 us a point: a fit of 100,000 points takes of the order of an hour on one core).
pub const MAX_ROWS: usize = 100_000;

/// Largest data file read (256 MiB).
pub const MAX_BYTES: u64 = 256 << 20;

/// Read and check a data file. Every problem is a [`CliError::Input`] naming the file, the
/// line and the column.
pub fn read(path: &Path) -> Result<DataSet, CliError> {
    let text = crate::fsio::read_input(path, MAX_BYTES).map_err(|e| {
        CliError::input(
            path,
            None,
            "file",
            format!("cannot be read: {e}"),
            format!(
                "a readable regular CSV file of at most {}",
                crate::fsio::size_words(MAX_BYTES)
            ),
        )
    })?;
    parse(path, &text)
}

/// Parse data from text (`path` is used in messages only).
pub fn parse(path: &Path, text: &str) -> Result<DataSet, CliError> {
    // A line of blanks is a blank line: emptied (line numbers kept), because the CSV reader
    // skips empty lines but would read blanks as a record of one empty field.
    let text: String = text
        .split_inclusive(['\n', '\r'])
        .map(|l| {
            let body = l.trim_end_matches(['\n', '\r']);
            if body.trim().is_empty() {
                &l[body.len()..]
            } else {
                l
            }
        })
        .collect();
    let text = text.as_str();
    let mut rdr = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .trim(csv::Trim::All)
        .flexible(true)
        .from_reader(text.as_bytes());
    let header_line = record_line(text, 0);
    let Some(header_line) = header_line else {
        return Err(CliError::input(
            path,
            None,
            "header",
            "the file is empty (no header, no data)",
            format!(
                "a header line with at least the columns {}, then one row per point",
                REQUIRED.join(", ")
            ),
        ));
    };
    let headers = rdr
        .headers()
        .map_err(|e| csv_error(path, text, Some(header_line), e))?
        .clone();
    let mut index: BTreeMap<String, usize> = BTreeMap::new();
    for (i, h) in headers.iter().enumerate() {
        if h.is_empty() {
            return Err(CliError::input(
                path,
                Some(header_line),
                "header",
                format!(
                    "column {} of the header has no name (an empty field or a stray comma)",
                    i + 1
                ),
                format!(
                    "the columns {}, separated by single commas",
                    REQUIRED
                        .iter()
                        .copied()
                        .chain(CONDITIONS.iter().map(|(c, _)| *c))
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            ));
        }
        let known = REQUIRED.contains(&h) || CONDITIONS.iter().any(|(c, _)| *c == h);
        if !known {
            let all: Vec<&str> = REQUIRED
                .iter()
                .copied()
                .chain(CONDITIONS.iter().map(|(c, _)| *c))
                .collect();
            let hint = all
                .iter()
                .map(|c| (strsim::jaro_winkler(c, h), *c))
                .filter(|(s, _)| *s > 0.8)
                .max_by(|a, b| a.0.total_cmp(&b.0))
                .map(|(_, c)| format!(" (did you mean `{c}`?)"))
                .unwrap_or_default();
            return Err(CliError::input(
                path,
                Some(header_line),
                h,
                format!("unknown column `{h}`{hint}"),
                format!("the columns {}", all.join(", ")),
            ));
        }
        if index.insert(h.to_string(), i).is_some() {
            return Err(CliError::input(
                path,
                Some(header_line),
                h,
                format!("column `{h}` appears twice"),
                "each column once",
            ));
        }
    }
    for r in REQUIRED {
        if !index.contains_key(r) {
            return Err(CliError::input(
                path,
                Some(header_line),
                r,
                format!("required column `{r}` is missing from the header"),
                format!("a header with at least {}", REQUIRED.join(", ")),
            ));
        }
    }
    let mut points = Vec::new();
    let mut from_study: BTreeMap<String, usize> = BTreeMap::new();
    let mut cursor = LineCursor::default();
    for record in rdr.records() {
        let record = record.map_err(|e| csv_error(path, text, None, e))?;
        let line = record
            .position()
            .and_then(|p| cursor.line_of_record(text, p.byte() as usize))
            .unwrap_or(header_line);
        if points.len() >= MAX_ROWS {
            return Err(CliError::input(
                path,
                Some(line),
                "row",
                format!("more than {MAX_ROWS} data rows"),
                format!("at most {MAX_ROWS} rows (points) in one fit: thin the data, or fit the curves in parts"),
            ));
        }
        if record.len() != headers.len() {
            return Err(CliError::input(
                path,
                Some(line),
                "row",
                format!(
                    "row has {} fields, the header has {}",
                    record.len(),
                    headers.len()
                ),
                "one field per header column (empty for a condition taken from the study)",
            ));
        }
        let cell = |col: &str| -> &str { record.get(index[col]).unwrap_or("") };
        let number = |col: &str| -> Result<Option<f64>, CliError> {
            let s = cell(col);
            if s.is_empty() {
                return Ok(None);
            }
            let v: f64 = s.parse().map_err(|_| {
                CliError::input(
                    path,
                    Some(line),
                    col,
                    format!("`{s}` is not a number"),
                    allowed_for(col),
                )
            })?;
            if !v.is_finite() || !in_range(col, v) {
                return Err(CliError::input(
                    path,
                    Some(line),
                    col,
                    format!("{v} is out of range"),
                    allowed_for(col),
                ));
            }
            Ok(Some(v))
        };
        let curve = cell("curve").to_string();
        if curve.is_empty() {
            return Err(CliError::input(
                path,
                Some(line),
                "curve",
                "empty curve label",
                allowed_for("curve"),
            ));
        }
        let required = |col: &str| -> Result<f64, CliError> {
            number(col)?.ok_or_else(|| {
                CliError::input(
                    path,
                    Some(line),
                    col,
                    "empty cell in a required column",
                    allowed_for(col),
                )
            })
        };
        let layer_voltage_v = required("layer_voltage_V")?;
        let current_density_a_m2 = required("current_density_A_m2")?;
        let mut conditions = PointConditions::default();
        for (col, _) in CONDITIONS {
            match index.contains_key(col) {
                true => match number(col)? {
                    Some(v) => conditions.set(col, v),
                    None => *from_study.entry(col.to_string()).or_default() += 1,
                },
                false => *from_study.entry(col.to_string()).or_default() += 1,
            }
        }
        points.push(DataPoint {
            curve,
            line,
            layer_voltage_v,
            current_density_a_m2,
            conditions,
        });
    }
    if points.is_empty() {
        return Err(CliError::input(
            path,
            Some(header_line),
            "rows",
            "the file has a header but no data rows",
            "one row per current-voltage point",
        ));
    }
    Ok(DataSet {
        file: path.to_path_buf(),
        points,
        from_study,
    })
}

/// The 1-based line on which the record that the CSV reader starts reading at byte `at`
/// begins, `None` when only line endings and comments follow. The reader's position of a
/// record is where the previous one ended: before the line ending (the `\n` of `\r\n`), the
/// empty lines and the comment lines (`#` in the first column) it skips.
fn record_line(text: &str, at: usize) -> Option<usize> {
    LineCursor::default().line_of_record(text, at)
}

/// Line numbers of records read in file order, in time linear in the file: the newlines are
/// counted from where the previous record's were (counting from the start for each record
/// made a 100,000-row file take minutes).
#[derive(Debug, Default)]
struct LineCursor {
    /// Byte position up to which newlines are counted.
    pos: usize,
    /// Newlines before `pos`.
    newlines: usize,
}

impl LineCursor {
    /// As [`record_line`]; `at` must not go back from one call to the next.
    fn line_of_record(&mut self, text: &str, at: usize) -> Option<usize> {
        let b = text.as_bytes();
        let mut i = at.min(b.len());
        while i < b.len() {
            match b[i] {
                b'\r' | b'\n' => i += 1,
                b'#' => {
                    while i < b.len() && b[i] != b'\n' && b[i] != b'\r' {
                        i += 1;
                    }
                }
                _ => {
                    if i < self.pos {
                        *self = LineCursor::default();
                    }
                    self.newlines += b[self.pos..i].iter().filter(|&&c| c == b'\n').count();
                    self.pos = i;
                    return Some(self.newlines + 1);
                }
            }
        }
        None
    }
}

fn csv_error(path: &Path, text: &str, line: Option<usize>, e: csv::Error) -> CliError {
    let line = line.or_else(|| {
        e.position()
            .and_then(|p| record_line(text, p.byte() as usize))
    });
    CliError::input(
        path,
        line,
        "row",
        format!("not readable as CSV: {e}"),
        "comma-separated values, UTF-8",
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn err(text: &str) -> String {
        parse(Path::new("d.csv"), text).unwrap_err().to_string()
    }

    #[test]
    fn reads_rows_and_counts_conditions_taken_from_the_study() {
        let text = "# invented\ncurve,layer_voltage_V,current_density_A_m2,pitch_m\n\
                    a,0.1,5,1e-4\na,0.2,7,\n";
        let d = parse(Path::new("d.csv"), text).unwrap();
        assert_eq!(d.points.len(), 2);
        assert_eq!(d.points[0].line, 3);
        assert_eq!(d.points[1].line, 4);
        assert_eq!(d.points[0].conditions.pitch_m, Some(1e-4));
        assert_eq!(d.points[1].conditions.pitch_m, None);
        assert_eq!(d.from_study["pitch_m"], 1);
        assert_eq!(d.from_study["velocity_m_s"], 2);
    }

    #[test]
    fn rows_beyond_the_limit_are_refused_and_line_numbers_hold_to_the_end() {
        // Audit item 10: a fit of 100,000 rows did not finish (line numbers were counted
        // from the start of the file for every row). The limit is stated, and lines are
        // still right at its end, past comments and blank lines.
        let mut text = String::from("curve,layer_voltage_V,current_density_A_m2\n");
        for k in 0..MAX_ROWS {
            if k % 1000 == 0 {
                text.push_str("# a comment\n\n");
            }
            text.push_str(&format!("c{},0.{},{}\n", k % 7, 1 + k % 8, 1 + k % 50));
        }
        let d = parse(Path::new("d.csv"), &text).unwrap();
        assert_eq!(d.points.len(), MAX_ROWS);
        assert_eq!(d.points[MAX_ROWS - 1].line, text.lines().count());
        assert_eq!(d.curves().len(), 7);
        text.push_str("c1,0.2,3\n");
        let e = parse(Path::new("d.csv"), &text).unwrap_err().to_string();
        assert!(
            e.contains(&format!("more than {MAX_ROWS} data rows")),
            "{e}"
        );
        assert!(e.contains(&format!(":{}:", text.lines().count())), "{e}");
    }

    #[test]
    fn bad_files_name_line_and_column() {
        let e = err("curve,layer_voltage_V\na,1\n");
        assert!(
            e.contains("d.csv:1") && e.contains("current_density_A_m2"),
            "{e}"
        );
        let e = err("curve,layer_voltage_V,current_density_A_m2\na,1,x\n");
        assert!(
            e.contains("d.csv:2") && e.contains("current_density_A_m2") && e.contains("`x`"),
            "{e}"
        );
        let e = err("curve,layer_voltage_V,current_density_A_m2\na,1,2\nb,1,-3\n");
        assert!(
            e.contains("d.csv:3") && e.contains("current_density_A_m2") && e.contains(">= 0"),
            "{e}"
        );
        let e = err("");
        assert!(e.contains("empty"), "{e}");
        let e = err("curve,layer_voltage_V,current_density_A_m2\n");
        assert!(e.contains("no data rows"), "{e}");
        let e = err("curve,layer_voltage,current_density_A_m2\n");
        assert!(e.contains("did you mean `layer_voltage_V`"), "{e}");
    }
}

//! SVG figures through `plotters` (SVG backend only, no font features: text goes into the SVG
//! as `<text>` elements and the viewer picks the font, so nothing needs system fonts). Shared
//! by the report, the hand-off cards and the fit; charts here, the membrane pattern drawn to
//! scale (and the window's stripes) in [`mod@pattern`].

pub mod pattern;

pub use pattern::{pattern, PatternFigure};

use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::drawing::DrawingAreaErrorKind;
use plotters::prelude::*;
use plotters::style::HSLColor;

/// Width and height of a standard figure, px.
pub const SIZE: (u32, u32) = (720, 440);

/// How a series is drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Mark {
    /// A solid line.
    Line,
    /// A dashed-looking thin line (drawn lighter).
    Faint,
    /// Dots.
    Points,
}

/// One named series of (x, y) points.
#[derive(Debug, Clone)]
pub struct Series {
    /// Legend name.
    pub name: String,
    /// Points.
    pub points: Vec<(f64, f64)>,
    /// How to draw.
    pub mark: Mark,
    /// Colour slot (0 = black: the unpatterned reference, then a palette).
    pub colour: usize,
}

/// Palette slot to colour: 0 is black (the unpatterned reference), then distinct hues.
pub fn palette(i: usize) -> RGBColor {
    const P: [RGBColor; 7] = [
        RGBColor(0, 0, 0),
        RGBColor(31, 119, 180),
        RGBColor(214, 39, 40),
        RGBColor(44, 160, 44),
        RGBColor(148, 103, 189),
        RGBColor(255, 127, 14),
        RGBColor(23, 190, 207),
    ];
    P[i % P.len()]
}

/// Colour for a value scaled to 0..1 (blue to red through green).
pub fn ramp(t: f64) -> HSLColor {
    let t = if t.is_finite() {
        t.clamp(0.0, 1.0)
    } else {
        0.5
    };
    HSLColor(0.66 * (1.0 - t), 0.75, 0.45)
}

/// Padded range of some values (a unit range around a single value).
pub fn range(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    let span = hi - lo;
    let pad = if span > 0.0 {
        0.05 * span
    } else {
        0.05 * lo.abs().max(1e-12)
    };
    (lo - pad, hi + pad)
}

/// A figure that plotters could not draw (the SVG backend writes into a string, so this is a
/// drawing error, not a file error).
#[derive(Debug, thiserror::Error)]
#[error("drawing failed: {0:?}")]
pub struct FigureError(#[source] DrawingAreaErrorKind<std::io::Error>);

pub(crate) fn err(e: DrawingAreaErrorKind<std::io::Error>) -> FigureError {
    FigureError(e)
}

/// The frame all charts share: caption, margins, and both axes with their descriptions and
/// number labels.
fn framed<'a, 'b>(
    area: &'a DrawingArea<SVGBackend<'b>, Shift>,
    title: &str,
    xr: (f64, f64),
    yr: (f64, f64),
    x_label: &str,
    y_label: &str,
) -> Result<
    ChartContext<'a, SVGBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>,
    FigureError,
> {
    let mut chart = ChartBuilder::on(area)
        .caption(title, ("sans-serif", 18))
        .margin(12)
        .x_label_area_size(44)
        .y_label_area_size(72)
        .build_cartesian_2d(xr.0..xr.1, yr.0..yr.1)
        .map_err(err)?;
    chart
        .configure_mesh()
        .x_desc(x_label)
        .y_desc(y_label)
        .x_label_formatter(&|v| fmt_tick(*v, xr))
        .y_label_formatter(&|v| fmt_tick(*v, yr))
        .light_line_style(WHITE)
        .draw()
        .map_err(err)?;
    Ok(chart)
}

/// A line/point chart of several series with a legend.
pub fn xy_chart(
    title: &str,
    x_label: &str,
    y_label: &str,
    series: &[Series],
) -> Result<String, FigureError> {
    let xr = range(series.iter().flat_map(|s| s.points.iter().map(|p| p.0)));
    let yr = range(series.iter().flat_map(|s| s.points.iter().map(|p| p.1)));
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(err)?;
        let mut chart = framed(&root, title, xr, yr, x_label, y_label)?;
        for s in series {
            let c = palette(s.colour);
            match s.mark {
                Mark::Line | Mark::Faint => {
                    let style = if s.mark == Mark::Line {
                        c.stroke_width(2)
                    } else {
                        c.mix(0.5).stroke_width(1)
                    };
                    chart
                        .draw_series(LineSeries::new(s.points.iter().copied(), style))
                        .map_err(err)?
                        .label(s.name.as_str())
                        .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], style));
                }
                Mark::Points => {
                    chart
                        .draw_series(s.points.iter().map(|&p| Circle::new(p, 3, c.filled())))
                        .map_err(err)?
                        .label(s.name.as_str())
                        .legend(move |(x, y)| Circle::new((x + 9, y), 3, c.filled()));
                }
            }
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK)
            .draw()
            .map_err(err)?;
        root.present().map_err(err)?;
    }
    Ok(buf)
}

/// A scatter of (x, y, colour value) with a colour bar, and an optional marked reference point.
pub fn scatter_coloured(
    title: &str,
    x_label: &str,
    y_label: &str,
    colour_label: &str,
    points: &[(f64, f64, f64)],
    marked: Option<(f64, f64, &str)>,
) -> Result<String, FigureError> {
    let xr = range(points.iter().map(|p| p.0).chain(marked.map(|m| m.0)));
    let yr = range(points.iter().map(|p| p.1).chain(marked.map(|m| m.1)));
    // the colour scale runs over the values themselves (no padding): its ends are the extremes
    let cr = {
        let (lo, hi) = points
            .iter()
            .map(|p| p.2)
            .filter(|v| v.is_finite())
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
                (lo.min(v), hi.max(v))
            });
        if !lo.is_finite() {
            (0.0, 1.0)
        } else if hi > lo {
            (lo, hi)
        } else {
            (
                lo - 0.5 * lo.abs().max(1e-12),
                hi + 0.5 * hi.abs().max(1e-12),
            )
        }
    };
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(err)?;
        let (main, side) = root.split_horizontally(SIZE.0 - 110);
        let mut chart = framed(&main, title, xr, yr, x_label, y_label)?;
        let t = |v: f64| (v - cr.0) / (cr.1 - cr.0);
        chart
            .draw_series(
                points
                    .iter()
                    .map(|&(x, y, v)| Circle::new((x, y), 4, ramp(t(v)).filled())),
            )
            .map_err(err)?;
        if let Some((x, y, name)) = marked {
            chart
                .draw_series(std::iter::once(Cross::new(
                    (x, y),
                    7,
                    BLACK.stroke_width(3),
                )))
                .map_err(err)?
                .label(name)
                .legend(|(x, y)| Cross::new((x + 8, y), 5, BLACK.stroke_width(2)));
            chart
                .configure_series_labels()
                .position(SeriesLabelPosition::UpperRight)
                .background_style(WHITE.mix(0.85))
                .border_style(BLACK)
                .draw()
                .map_err(err)?;
        }
        // colour bar: 20 steps from the low (bottom) to the high (top) end
        let bar = side.margin(60, 60, 10, 50);
        let (_, h) = bar.dim_in_pixel();
        let steps = 20;
        for k in 0..steps {
            let y0 = (h as f64 * (1.0 - (k + 1) as f64 / steps as f64)) as i32;
            let y1 = (h as f64 * (1.0 - k as f64 / steps as f64)) as i32;
            let c = ramp((k as f64 + 0.5) / steps as f64);
            bar.draw(&Rectangle::new([(0, y0), (18, y1)], c.filled()))
                .map_err(err)?;
        }
        let style = ("sans-serif", 12).into_font().color(&BLACK);
        bar.draw(&Text::new(fmt_num(cr.1), (22, 0), style.clone()))
            .map_err(err)?;
        bar.draw(&Text::new(
            fmt_num(cr.0),
            (22, h as i32 - 12),
            style.clone(),
        ))
        .map_err(err)?;
        // the label on two lines: the name, then the unit in brackets
        let (name, unit) = match colour_label.find(" (") {
            Some(k) => (&colour_label[..k], &colour_label[k + 1..]),
            None => (colour_label, ""),
        };
        side.draw(&Text::new(name.to_string(), (4, 16), style.clone()))
            .map_err(err)?;
        side.draw(&Text::new(unit.to_string(), (4, 32), style))
            .map_err(err)?;
        root.present().map_err(err)?;
    }
    Ok(buf)
}

/// Number for a label: 4 significant figures.
pub fn fmt_num(v: f64) -> String {
    if !v.is_finite() {
        return "-".into();
    }
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    if (1e-3..1e5).contains(&a) {
        let decimals = (3 - a.log10().floor() as i32).max(0) as usize;
        let s = format!("{v:.decimals$}");
        if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        }
    } else {
        format!("{v:.3e}")
    }
}

/// Number for an axis label on the range `(lo, hi)`: every label of an axis in the same
/// notation (fixed, or scientific when the range's largest magnitude is below 0.01 or from 1e5
/// up) and with as many digits as the tick spacing needs (about a tenth of the range), so an
/// axis reads 6e-4, 7e-4, ..., 1.0e-3, 1.1e-3 rather than switching notation mid-axis.
pub fn fmt_tick(v: f64, (lo, hi): (f64, f64)) -> String {
    let span = hi - lo;
    if !v.is_finite() || !span.is_finite() || span <= 0.0 {
        return fmt_num(v);
    }
    // The tick spacing: the smallest of 1, 2 and 5 times a power of ten that leaves at most
    // ten ticks (the mesh's label count), and the decade the labels must resolve.
    let rough = span / 10.0;
    let decade = 10f64.powf(rough.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .into_iter()
        .map(|m| m * decade)
        .find(|&st| st >= rough * (1.0 - 1e-12))
        .unwrap_or(10.0 * decade);
    let step_exp = step.log10().floor() as i32;
    let big = lo.abs().max(hi.abs());
    if (1e-2..1e5).contains(&big) {
        let decimals = (-step_exp).max(0) as usize;
        format!("{v:.decimals$}")
    } else if v.abs() < 10f64.powi(step_exp - 1) {
        // a tick at zero, off by round-off
        "0".into()
    } else {
        let exp = v.abs().log10().floor() as i32;
        let digits = (exp - step_exp).clamp(0, 6) as usize;
        format!("{v:.digits$e}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn charts_are_well_formed_xml() {
        let s = Series {
            name: "a & b".into(),
            points: vec![(0.0, 1.0), (1.0, 2.0)],
            mark: Mark::Line,
            colour: 1,
        };
        let svg = xy_chart("t <1>", "x", "y", &[s]).unwrap();
        roxmltree::Document::parse(&svg).unwrap();
        let svg = scatter_coloured(
            "t",
            "x",
            "y",
            "c",
            &[(0.0, 1.0, 2.0), (1.0, 0.0, 3.0)],
            Some((0.5, 0.5, "base")),
        )
        .unwrap();
        roxmltree::Document::parse(&svg).unwrap();
        let svg = pattern(&PatternFigure {
            title: "p",
            window_m: 4e-4,
            height_m: 2e-4,
            conducting: &[[0.0, 5e-5], [1e-4, 1.5e-4]],
            delta_m: 1e-4,
            wavelength_m: Some(1.2e-4),
            wall_m: Some(5e-4),
        })
        .unwrap();
        roxmltree::Document::parse(&svg).unwrap();
    }

    #[test]
    fn numbers_keep_four_significant_figures() {
        assert_eq!(fmt_num(0.123456), "0.1235");
        assert_eq!(fmt_num(1234.7), "1235");
        assert_eq!(fmt_num(2.5e-7), "2.500e-7");
        assert_eq!(fmt_num(0.5), "0.5");
    }

    #[test]
    fn axis_labels_share_one_notation() {
        let r = (5.0e-4, 1.45e-3);
        let labels: Vec<String> = [6e-4, 8e-4, 1e-3, 1.1e-3, 1.4e-3]
            .iter()
            .map(|&v| fmt_tick(v, r))
            .collect();
        assert_eq!(labels, ["6e-4", "8e-4", "1.0e-3", "1.1e-3", "1.4e-3"]);
        let r = (-0.02, 0.47);
        let labels: Vec<String> = [0.0, 0.05, 0.1, 0.45]
            .iter()
            .map(|&v| fmt_tick(v, r))
            .collect();
        assert_eq!(labels, ["0.00", "0.05", "0.10", "0.45"]);
        assert_eq!(fmt_tick(400.0, (0.0, 1100.0)), "400");
        assert_eq!(fmt_tick(1e-17, (-1.0, 1.0)), "0.0");
        assert_eq!(fmt_tick(1e-20, (-1e-3, 1e-3)), "0");
        assert_eq!(fmt_tick(2.5e6, (0.0, 5e6)), "2.5e6");
    }
}

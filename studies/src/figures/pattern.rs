//! One membrane pattern drawn to scale, and the window it shows: whole pitches with their
//! conducting and inert stripes (the same window a hand-off card simulates).

use plotters::prelude::*;

use super::{err, fmt_num, fmt_tick, FigureError};

/// Stripe edges of a window of `n` pitches starting with a conducting stripe at x = 0:
/// (conducting, inert), each [start, end] in m. An unpatterned window is one conducting stripe.
pub fn stripes(pitch_m: f64, open_fraction: f64, n: usize) -> (Vec<[f64; 2]>, Vec<[f64; 2]>) {
    let window = pitch_m * n as f64;
    if open_fraction >= 1.0 {
        return (vec![[0.0, window]], Vec::new());
    }
    let mut conducting = Vec::with_capacity(n);
    let mut inert = Vec::with_capacity(n);
    for k in 0..n {
        let x0 = pitch_m * k as f64;
        let x1 = x0 + open_fraction * pitch_m;
        let x2 = pitch_m * (k + 1) as f64;
        conducting.push([x0, x1]);
        inert.push([x1, x2]);
    }
    (conducting, inert)
}

/// Whole pitches in the window: enough for four vortex wavelengths and four diffusion-layer
/// thicknesses, at least two, at most 400.
pub fn pitches_for_window(pitch_m: f64, delta_m: f64, wavelength_m: Option<f64>) -> usize {
    let span = 4.0 * delta_m.max(wavelength_m.unwrap_or(0.0));
    ((span / pitch_m).ceil() as usize).clamp(2, 400)
}

/// One membrane pattern drawn to scale: a window of the membrane seen from the side, with
/// conducting and inert stripes, the diffusion-layer thickness and the vortex wavelength as
/// bars of true length. Lengths in m; drawn in micrometres.
pub struct PatternFigure<'a> {
    /// Title.
    pub title: &'a str,
    /// Window length, m.
    pub window_m: f64,
    /// Height wanted above the membrane, m (the figure keeps equal scales, so the height shown
    /// may differ).
    pub height_m: f64,
    /// The opposite wall, m above the membrane, drawn when it fits.
    pub wall_m: Option<f64>,
    /// Conducting stripes [x0, x1], m.
    pub conducting: &'a [[f64; 2]],
    /// Diffusion-layer thickness, m.
    pub delta_m: f64,
    /// Vortex wavelength, m (None: no vortices).
    pub wavelength_m: Option<f64>,
}

type Chart<'a, 'b> = ChartContext<
    'a,
    SVGBackend<'b>,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

fn pattern_chart<'a, 'b>(
    root: &'a DrawingArea<SVGBackend<'b>, plotters::coord::Shift>,
    title: &str,
    w: f64,
    hgt: f64,
) -> Result<Chart<'a, 'b>, FigureError> {
    ChartBuilder::on(root)
        .caption(title, ("sans-serif", 16))
        .margin(10)
        .x_label_area_size(40)
        .y_label_area_size(60)
        .build_cartesian_2d(0.0..w, -0.05 * hgt..0.95 * hgt)
        .map_err(err)
}

/// Draw a [`PatternFigure`] (equal scales on both axes).
pub fn pattern(fig: &PatternFigure) -> Result<String, FigureError> {
    let um = 1e6;
    let w = fig.window_m * um;
    // Equal scales on both axes: the canvas height follows the height asked for, then the
    // shown height is set from the plotting area's measured pixels.
    let width = 720u32;
    let wanted = 1.2 * 600.0 * fig.height_m / fig.window_m;
    let size = (width, (wanted + 130.0).clamp(260.0, 1000.0) as u32);
    let (pw, ph) = {
        let mut scratch = String::new();
        let root = SVGBackend::with_string(&mut scratch, size).into_drawing_area();
        let chart = pattern_chart(&root, fig.title, w, 1.0)?;
        chart.plotting_area().dim_in_pixel()
    };
    let hgt = w * ph as f64 / pw as f64;
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, size).into_drawing_area();
        root.fill(&WHITE).map_err(err)?;
        let mut chart = pattern_chart(&root, fig.title, w, hgt)?;
        chart
            .configure_mesh()
            .x_desc("along the flow (um)")
            .y_desc("height (um)")
            .x_label_formatter(&|v| fmt_tick(*v, (0.0, w)))
            .y_label_formatter(&|v| fmt_tick(*v, (-0.05 * hgt, 0.95 * hgt)))
            .disable_mesh()
            .draw()
            .map_err(err)?;
        // the membrane: inert (grey) everywhere, conducting stripes on top (dark blue)
        let base = -0.04 * hgt;
        if let Some(wall) = fig.wall_m.map(|m| m * um).filter(|m| *m < 0.95 * hgt) {
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(0.0, wall), (w, (wall + 0.02 * hgt).min(0.95 * hgt))],
                    RGBColor(120, 120, 120).filled(),
                )))
                .map_err(err)?
                .label("opposite wall")
                .legend(|(x, y)| {
                    Rectangle::new(
                        [(x, y - 2), (x + 14, y + 2)],
                        RGBColor(120, 120, 120).filled(),
                    )
                });
        }
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(0.0, base), (w, 0.0)],
                RGBColor(190, 190, 190).filled(),
            )))
            .map_err(err)?
            .label("inert stripe")
            .legend(|(x, y)| {
                Rectangle::new(
                    [(x, y - 4), (x + 14, y + 4)],
                    RGBColor(190, 190, 190).filled(),
                )
            });
        chart
            .draw_series(fig.conducting.iter().map(|s| {
                Rectangle::new(
                    [(s[0] * um, base), (s[1] * um, 0.0)],
                    RGBColor(31, 80, 160).filled(),
                )
            }))
            .map_err(err)?
            .label("conducting stripe")
            .legend(|(x, y)| {
                Rectangle::new(
                    [(x, y - 4), (x + 14, y + 4)],
                    RGBColor(31, 80, 160).filled(),
                )
            });
        // diffusion layer edge
        let d = fig.delta_m * um;
        chart
            .draw_series(LineSeries::new(
                vec![(0.0, d), (w, d)],
                RGBColor(214, 39, 40).stroke_width(2),
            ))
            .map_err(err)?
            .label(format!("diffusion layer, delta = {} um", fmt_num(d)))
            .legend(|(x, y)| {
                PathElement::new(
                    vec![(x, y), (x + 14, y)],
                    RGBColor(214, 39, 40).stroke_width(2),
                )
            });
        // vortex pairs: one wavelength holds two counter-rotating rolls of diameter lambda/2
        if let Some(lv) = fig.wavelength_m {
            let l = lv * um;
            let r = 0.25 * l;
            let n = (w / l).floor().max(1.0) as usize;
            let mut rolls = Vec::new();
            for k in 0..(2 * n) {
                let cx = (k as f64 + 0.5) * 0.5 * l;
                if cx + r > w * 1.0001 {
                    break;
                }
                let pts: Vec<(f64, f64)> = (0..=48)
                    .map(|j| {
                        let a = j as f64 / 48.0 * std::f64::consts::TAU;
                        (cx + r * a.cos(), r + r * a.sin())
                    })
                    .collect();
                rolls.push(pts);
            }
            chart
                .draw_series(
                    rolls
                        .into_iter()
                        .map(|pts| PathElement::new(pts, RGBColor(44, 160, 44).stroke_width(1))),
                )
                .map_err(err)?
                .label(format!(
                    "vortex wavelength = {} um (pair of rolls)",
                    fmt_num(l)
                ))
                .legend(|(x, y)| Circle::new((x + 7, y), 5, RGBColor(44, 160, 44).stroke_width(1)));
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperRight)
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK)
            .draw()
            .map_err(err)?;
        root.present().map_err(err)?;
    }
    Ok(buf)
}

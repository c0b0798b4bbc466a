//! `geometry.geo`: a case's 2-D window in Gmsh's geometry format (the `.geo` language of the
//! open-source mesher Gmsh), built from the card alone.
//!
//! The window is cut into columns at the stripe edges and into two layers: a graded layer at
//! the membrane (first spacing and growth ratio of the card's mesh estimate, up to the largest
//! wall-normal spacing) and a uniform layer up to the opposite wall. Every block is a
//! transfinite (structured) patch of quadrilaterals, so `gmsh -2 geometry.geo` gives about
//! the card's `mesh.estimated_cells`. Physical groups carry the boundary kinds of the card's
//! `boundary_conditions` (with underscores, since many solvers take them as patch names) and
//! the fluid surface. Coordinates in metres, x along the flow from the window's upstream edge,
//! y from the patterned membrane.

use std::fmt::Write as _;

use super::case::CaseCard;

/// Physical group names, in the order of the card's boundary conditions, and the fluid's.
pub const GROUPS: [(&str, &str); 6] = [
    ("inflow", "inflow"),
    ("outflow", "outflow"),
    ("conducting stripes", "conducting_stripes"),
    ("inert stripes", "inert_stripes"),
    ("opposite wall", "opposite_wall"),
    ("fluid", "fluid"),
];

/// The wall-normal split of the mesh estimate: graded cells from the membrane, the graded
/// layer's height, uniform cells above it (0 when the graded layer fills the gap).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WallNormal {
    /// Cells of the graded layer.
    pub graded_cells: u64,
    /// Height of the graded layer, m.
    pub graded_height_m: f64,
    /// Cells of the uniform layer.
    pub uniform_cells: u64,
}

/// The wall-normal layers of a spacing that starts at `first`, grows by `ratio` per cell until
/// it reaches `max`, then stays uniform up to `height` (the rule of the card's estimate).
pub fn wall_normal(height: f64, first: f64, ratio: f64, max: f64) -> WallNormal {
    let graded = if first >= max || ratio <= 1.0 {
        0
    } else {
        ((max / first).ln() / ratio.ln()).ceil().max(0.0) as u64
    };
    let graded_height = if graded == 0 {
        0.0
    } else {
        first * (ratio.powi(graded as i32) - 1.0) / (ratio - 1.0)
    };
    if graded_height >= height {
        // The graded layer alone fills the gap: grade the whole gap (its cell count from the
        // same growth, the last cell taking up the rest).
        let n = ((1.0 + height * (ratio - 1.0) / first).ln() / ratio.ln()).ceil() as u64;
        return WallNormal {
            graded_cells: n.max(1),
            graded_height_m: height,
            uniform_cells: 0,
        };
    }
    WallNormal {
        graded_cells: graded,
        graded_height_m: graded_height,
        uniform_cells: ((height - graded_height) / max).ceil().max(1.0) as u64,
    }
}

/// The window's columns between stripe edges: (start, end, conducting) in m.
pub fn columns(card: &CaseCard) -> Vec<(f64, f64, bool)> {
    let g = &card.geometry;
    let mut out: Vec<(f64, f64, bool)> = g
        .conducting_stripes_m
        .iter()
        .map(|s| (s[0], s[1], true))
        .chain(g.inert_stripes_m.iter().map(|s| (s[0], s[1], false)))
        .filter(|(a, b, _)| b > a)
        .collect();
    out.sort_by(|a, b| a.0.total_cmp(&b.0));
    out
}

/// Streamwise cells of a column of width `w` at spacing `dx` (at least one).
pub fn column_cells(w: f64, dx: f64) -> u64 {
    ((w / dx).round() as u64).max(1)
}

/// The quadrilaterals `gmsh -2` makes of the file: columns times wall-normal cells.
pub fn cells(card: &CaseCard) -> u64 {
    let m = &card.mesh;
    let wn = wall_normal(
        card.geometry.gap_m,
        m.wall_normal_first_spacing_m,
        m.wall_normal_growth_ratio,
        m.wall_normal_max_spacing_m,
    );
    let nx: u64 = columns(card)
        .iter()
        .map(|(a, b, _)| column_cells(b - a, m.streamwise_spacing_m))
        .sum();
    nx * (wn.graded_cells + wn.uniform_cells)
}

/// A number as Gmsh reads it, exactly (the shortest text that reads back to the same f64).
fn num(x: f64) -> String {
    if x == 0.0 {
        "0".into()
    } else {
        format!("{x:e}")
    }
}

/// The `.geo` text of a card.
pub fn geo(card: &CaseCard) -> String {
    let g = &card.geometry;
    let m = &card.mesh;
    let h = g.gap_m;
    let wn = wall_normal(
        h,
        m.wall_normal_first_spacing_m,
        m.wall_normal_growth_ratio,
        m.wall_normal_max_spacing_m,
    );
    let two_layers = wn.uniform_cells > 0;
    let cols = columns(card);
    let mut s = String::new();
    let _ = writeln!(
        s,
        "// {}: the 2-D window of case.json in Gmsh's geometry format (written by stria handoff).\n\
         // Mesh it with `gmsh -2 geometry.geo` (add `-format msh2` for older readers).\n\
         // Metres; x along the flow from the window's upstream edge (0 to {} m), y from the\n\
         // {} membrane (y = 0) to the opposite wall (y = gap). Boundary kinds as physical\n\
         // groups, named as case.json's boundary_conditions with underscores: inflow (x = 0),\n\
         // outflow (x = window), conducting_stripes and inert_stripes (y = 0),\n\
         // opposite_wall (y = gap); the fluid surface is `fluid`.\n\
         // Structured quadrilaterals with the sizes of case.json's mesh estimate: change the\n\
         // sizes below to refine (halve dx and dy0 for a convergence check).",
        card.name,
        num(g.window_length_m),
        if card.unpatterned_reference {
            "unpatterned"
        } else {
            "patterned"
        },
    );
    let _ = writeln!(s, "\nh = {};        // channel gap", num(h));
    let _ = writeln!(
        s,
        "dx = {};       // streamwise spacing (mesh.streamwise_spacing_m)",
        num(m.streamwise_spacing_m)
    );
    let _ = writeln!(
        s,
        "dy0 = {};      // first wall-normal spacing at the membrane",
        num(m.wall_normal_first_spacing_m)
    );
    let _ = writeln!(
        s,
        "ratio = {};    // growth of the wall-normal spacing per cell",
        num(m.wall_normal_growth_ratio)
    );
    let _ = writeln!(
        s,
        "dymax = {};    // largest wall-normal spacing",
        num(m.wall_normal_max_spacing_m)
    );
    if two_layers {
        s.push_str(
            "ng = Ceil(Log(dymax / dy0) / Log(ratio));      // graded cells from the membrane\n\
             yg = dy0 * (ratio^ng - 1) / (ratio - 1);        // top of the graded layer\n\
             nu = Max(1, Ceil((h - yg) / dymax));             // uniform cells above it\n",
        );
    } else {
        s.push_str(
            "// the graded layer fills the gap\n\
             ng = Ceil(Log(1 + h * (ratio - 1) / dy0) / Log(ratio));\n",
        );
    }
    // Points: per column edge x_j, at y = 0, (yg,) h; point tags 1.. in rows of 3 (or 2).
    let mut xs: Vec<f64> = cols.iter().map(|c| c.0).collect();
    xs.push(cols.last().map_or(g.window_length_m, |c| c.1));
    let rows = if two_layers { 3 } else { 2 };
    let pt = |j: usize, r: usize| 1 + j * rows + r;
    s.push_str(
        "\n// points at the stripe edges: membrane, (top of the graded layer,) opposite wall\n",
    );
    for (j, x) in xs.iter().enumerate() {
        let ys: Vec<&str> = if two_layers {
            vec!["0", "yg", "h"]
        } else {
            vec!["0", "h"]
        };
        for (r, y) in ys.iter().enumerate() {
            let _ = writeln!(s, "Point({}) = {{{}, {y}, 0, dx}};", pt(j, r), num(*x));
        }
    }
    // Curves: horizontal ones per column and level, vertical ones per edge and layer.
    let ncol = cols.len();
    let levels = rows;
    let hor = |i: usize, r: usize| 1 + r * ncol + i;
    let vert_base = 1 + levels * ncol;
    let layers = rows - 1;
    let ver = |j: usize, l: usize| vert_base + j * layers + l;
    s.push_str(
        "\n// horizontal curves (per column and level) and vertical curves (per edge and layer)\n",
    );
    for r in 0..levels {
        for i in 0..ncol {
            let _ = writeln!(
                s,
                "Line({}) = {{{}, {}}};",
                hor(i, r),
                pt(i, r),
                pt(i + 1, r)
            );
        }
    }
    for j in 0..xs.len() {
        for l in 0..layers {
            let _ = writeln!(
                s,
                "Line({}) = {{{}, {}}};",
                ver(j, l),
                pt(j, l),
                pt(j, l + 1)
            );
        }
    }
    s.push_str("\n// structured blocks: each column of each layer\n");
    let mut surfaces = Vec::new();
    for (i, (a, b, _)) in cols.iter().enumerate() {
        let n = column_cells(b - a, m.streamwise_spacing_m);
        let _ = writeln!(
            s,
            "Transfinite Curve{{{}}} = {} + 1;  // {} m wide: Round(width / dx) = {n} cells",
            (0..levels)
                .map(|r| hor(i, r).to_string())
                .collect::<Vec<_>>()
                .join(", "),
            n,
            num(b - a),
        );
        for l in 0..layers {
            let tag = 1 + l * ncol + i;
            let _ = writeln!(
                s,
                "Curve Loop({tag}) = {{{}, {}, -{}, -{}}};\nPlane Surface({tag}) = {{{tag}}};\n\
                 Transfinite Surface{{{tag}}};\nRecombine Surface{{{tag}}};",
                hor(i, l),
                ver(i + 1, l),
                hor(i, l + 1),
                ver(i, l)
            );
            surfaces.push(tag);
        }
    }
    let verticals = |l: usize| {
        (0..xs.len())
            .map(|j| ver(j, l).to_string())
            .collect::<Vec<_>>()
            .join(", ")
    };
    let _ = writeln!(
        s,
        "Transfinite Curve{{{}}} = ng + 1 Using Progression ratio;",
        verticals(0)
    );
    if two_layers {
        let _ = writeln!(s, "Transfinite Curve{{{}}} = nu + 1;", verticals(1));
    }
    let list = |v: Vec<usize>| {
        v.iter()
            .map(|t| t.to_string())
            .collect::<Vec<_>>()
            .join(", ")
    };
    s.push_str("\n// boundary kinds (case.json boundary_conditions) and the fluid\n");
    let last = xs.len() - 1;
    let conducting: Vec<usize> = (0..ncol)
        .filter(|&i| cols[i].2)
        .map(|i| hor(i, 0))
        .collect();
    let inert: Vec<usize> = (0..ncol)
        .filter(|&i| !cols[i].2)
        .map(|i| hor(i, 0))
        .collect();
    let groups: [(&str, Vec<usize>); 5] = [
        ("inflow", (0..layers).map(|l| ver(0, l)).collect()),
        ("outflow", (0..layers).map(|l| ver(last, l)).collect()),
        ("conducting_stripes", conducting),
        ("inert_stripes", inert),
        (
            "opposite_wall",
            (0..ncol).map(|i| hor(i, levels - 1)).collect(),
        ),
    ];
    for (k, (name, tags)) in groups.into_iter().enumerate() {
        if tags.is_empty() {
            let _ = writeln!(s, "// {name}: none in this window");
            continue;
        }
        let _ = writeln!(
            s,
            "Physical Curve(\"{name}\", {}) = {{{}}};",
            k + 1,
            list(tags)
        );
    }
    let _ = writeln!(
        s,
        "Physical Surface(\"fluid\", 6) = {{{}}};",
        list(surfaces)
    );
    s
}

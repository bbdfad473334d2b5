//! Figures as SVG through plotters (SVG backend only: no system fonts or C libraries; the
//! backend escapes text it writes).
//!
//! Every figure shows every observation (jittered deterministically, so a rerun draws the same
//! picture) and, by kind, the group means with their confidence intervals or box plots.
//! Colours come from Partita's own palette of six hues chosen to stay distinct under the common
//! colour-vision deficiencies.

use crate::lang::ast::PlotKind;
use plotters::chart::MeshStyle;
use plotters::coord::{CoordTranslate, ranged1d::Ranged};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// Partita's palette.
pub const PALETTE: [RGBColor; 6] = [
    RGBColor(0x1f, 0x5f, 0x9e),
    RGBColor(0xd9, 0x7a, 0x1e),
    RGBColor(0x2e, 0x8b, 0x6a),
    RGBColor(0xa8, 0x4c, 0x8c),
    RGBColor(0x6b, 0x6b, 0x6b),
    RGBColor(0x8a, 0x6d, 0x1b),
];

/// Grid lines: faint, so the data stand out.
const GRID: RGBColor = RGBColor(0xe4, 0xe4, 0xe4);

/// The mesh in Partita's style: faint grid lines, tick labels of `size` px and axis titles
/// one px larger.
fn mesh<'m, 'a, 'b, X: Ranged, Y: Ranged, DB: DrawingBackend>(
    m: &'m mut MeshStyle<'a, 'b, X, Y, DB>,
    size: u32,
) -> &'m mut MeshStyle<'a, 'b, X, Y, DB> {
    m.light_line_style(TRANSPARENT)
        .bold_line_style(GRID)
        .label_style(("sans-serif", size))
        .axis_desc_style(("sans-serif", size + 1))
}

/// The legend box, in the same style on every figure.
fn legend<'a, DB: DrawingBackend + 'a, CT: CoordTranslate>(
    chart: &mut ChartContext<'a, DB, CT>,
    at: SeriesLabelPosition,
) -> Option<()> {
    chart
        .configure_series_labels()
        .position(at)
        .background_style(WHITE.mix(0.9))
        .border_style(RGBColor(0xbb, 0xbb, 0xbb))
        .label_font(("sans-serif", 12))
        .draw()
        .ok()
}

/// Most points drawn per group; larger groups are drawn as an evenly spaced sample.
pub const MAX_DRAWN: usize = 1000;

/// One group to draw.
#[derive(Debug, Clone)]
pub struct Group {
    /// Level name.
    pub name: String,
    /// Observed values.
    pub values: Vec<f64>,
    /// Mean.
    pub mean: f64,
    /// CI bounds, if defined.
    pub ci: Option<(f64, f64)>,
    /// A label above the group (the compact letters after a comparison).
    pub label: Option<String>,
}

/// A figure request.
#[derive(Debug, Clone)]
pub struct Figure {
    /// Kind.
    pub kind: PlotKind,
    /// Groups in display order.
    pub groups: Vec<Group>,
    /// x-axis label.
    pub x_label: String,
    /// y-axis label.
    pub y_label: String,
    /// Confidence level (for the legend text).
    pub level: f64,
}

/// Deterministic jitter in [−0.5, 0.5) for observation `i` of group `g`.
fn jitter(g: usize, i: usize) -> f64 {
    let mut h = (g as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15)
        ^ (i as u64).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    h ^= h >> 31;
    h = h.wrapping_mul(0x94D0_49BB_1331_11EB);
    h ^= h >> 29;
    (h % 10_000) as f64 / 10_000.0 - 0.5
}

/// Quartiles by linear interpolation between order statistics (Hyndman & Fan 1996, type 7).
pub fn quantile(sorted: &[f64], q: f64) -> f64 {
    let h = (sorted.len() - 1) as f64 * q;
    let lo = h.floor() as usize;
    let hi = h.ceil() as usize;
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

/// Draws the figure; `None` if it cannot be drawn (the answer then says so in a note).
pub fn draw(fig: &Figure) -> Option<String> {
    let k = fig.groups.len();
    if k == 0 {
        return None;
    }
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for g in &fig.groups {
        for &v in &g.values {
            lo = lo.min(v);
            hi = hi.max(v);
        }
        if let Some((a, b)) = g.ci {
            lo = lo.min(a);
            hi = hi.max(b);
        }
    }
    if !lo.is_finite() || !hi.is_finite() {
        return None;
    }
    let pad = if hi > lo {
        (hi - lo) * 0.08
    } else {
        lo.abs().max(1.0) * 0.1
    };
    let letters = if fig.groups.iter().any(|g| g.label.is_some()) {
        2.0
    } else {
        1.0
    };
    let (lo, hi) = (lo - pad, hi + pad * letters);
    // plotters escapes text itself when it writes SVG.
    let names: Vec<String> = fig.groups.iter().map(|g| g.name.clone()).collect();
    let mut buf = String::new();
    let longest = fig
        .groups
        .iter()
        .map(|g| g.name.chars().count())
        .max()
        .unwrap_or(4) as u32;
    let per_group = (longest * 8 + 16).clamp(90, 150);
    let width = (160 + per_group * k as u32).clamp(360, 1800);
    {
        let root = SVGBackend::with_string(&mut buf, (width, 360)).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let mut chart = ChartBuilder::on(&root)
            .margin(14)
            .x_label_area_size(44)
            .y_label_area_size(62)
            .build_cartesian_2d(-0.5f64..(k as f64 - 0.5), lo..hi)
            .ok()?;
        let fmt_x = |_: &f64| String::new();
        let x_desc = fig.x_label.clone();
        let y_desc = fig.y_label.clone();
        mesh(&mut chart.configure_mesh(), 13)
            .disable_x_mesh()
            .x_labels(0)
            .x_label_formatter(&fmt_x)
            .x_desc(x_desc.as_str())
            .y_desc(y_desc.as_str())
            .draw()
            .ok()?;
        for (gi, g) in fig.groups.iter().enumerate() {
            let colour = PALETTE[gi % PALETTE.len()];
            let x0 = gi as f64;
            let spread = if fig.kind == PlotKind::Points {
                0.5
            } else {
                0.3
            };
            let shift = if fig.kind == PlotKind::Means {
                -0.12
            } else {
                0.0
            };
            let step = g.values.len().div_ceil(MAX_DRAWN).max(1);
            chart
                .draw_series(g.values.iter().enumerate().step_by(step).map(|(i, &v)| {
                    Circle::new(
                        (x0 + shift + spread * jitter(gi, i), v),
                        3,
                        colour.mix(0.55).filled(),
                    )
                }))
                .ok()?;
            match fig.kind {
                PlotKind::Means => {
                    let xm = x0 + 0.2;
                    if let Some((a, b)) = g.ci {
                        let s = BLACK.stroke_width(2);
                        chart
                            .draw_series(std::iter::once(PathElement::new(
                                vec![(xm, a), (xm, b)],
                                s,
                            )))
                            .ok()?;
                        for y in [a, b] {
                            chart
                                .draw_series(std::iter::once(PathElement::new(
                                    vec![(xm - 0.05, y), (xm + 0.05, y)],
                                    s,
                                )))
                                .ok()?;
                        }
                    }
                    chart
                        .draw_series(std::iter::once(Circle::new(
                            (xm, g.mean),
                            5,
                            BLACK.filled(),
                        )))
                        .ok()?;
                }
                PlotKind::Box => {
                    let mut s = g.values.clone();
                    s.sort_by(|a, b| a.total_cmp(b));
                    if s.is_empty() {
                        continue;
                    }
                    let (q1, q2, q3) = (quantile(&s, 0.25), quantile(&s, 0.5), quantile(&s, 0.75));
                    let iqr = q3 - q1;
                    let wl = s
                        .iter()
                        .copied()
                        .find(|&v| v >= q1 - 1.5 * iqr)
                        .unwrap_or(q1);
                    let wh = s
                        .iter()
                        .rev()
                        .copied()
                        .find(|&v| v <= q3 + 1.5 * iqr)
                        .unwrap_or(q3);
                    let st = BLACK.stroke_width(1);
                    let (xa, xb) = (x0 - 0.25, x0 + 0.25);
                    chart
                        .draw_series(std::iter::once(Rectangle::new([(xa, q1), (xb, q3)], st)))
                        .ok()?;
                    chart
                        .draw_series(std::iter::once(PathElement::new(
                            vec![(xa, q2), (xb, q2)],
                            BLACK.stroke_width(2),
                        )))
                        .ok()?;
                    chart
                        .draw_series(std::iter::once(PathElement::new(
                            vec![(x0, q3), (x0, wh)],
                            st,
                        )))
                        .ok()?;
                    chart
                        .draw_series(std::iter::once(PathElement::new(
                            vec![(x0, q1), (x0, wl)],
                            st,
                        )))
                        .ok()?;
                }
                _ => {}
            }
        }
        // Letters above each group's highest point or interval end.
        let above = TextStyle::from(("sans-serif", 14).into_font())
            .pos(Pos::new(HPos::Center, VPos::Bottom));
        for (i, g) in fig.groups.iter().enumerate() {
            if let Some(l) = &g.label {
                let top = g
                    .values
                    .iter()
                    .copied()
                    .chain(g.ci.map(|c| c.1))
                    .fold(g.mean, f64::max);
                let x = i as f64
                    + if fig.kind == PlotKind::Means {
                        0.2
                    } else {
                        0.0
                    };
                let (px, py) = chart.backend_coord(&(x, top));
                root.draw(&Text::new(l.clone(), (px, py - 6), above.clone()))
                    .ok()?;
            }
        }
        // Level names under their groups (drawn directly: the x axis is positional).
        let style =
            TextStyle::from(("sans-serif", 13).into_font()).pos(Pos::new(HPos::Center, VPos::Top));
        for (i, n) in names.iter().enumerate() {
            let (px, py) = chart.backend_coord(&(i as f64, lo));
            root.draw(&Text::new(n.clone(), (px, py + 6), style.clone()))
                .ok()?;
        }
        root.present().ok()?;
    }
    Some(buf)
}

/// One scatter panel: points, an optional reference line, labels.
#[derive(Debug, Clone)]
pub struct XyPanel {
    /// Panel title.
    pub title: String,
    /// (x, y) points.
    pub points: Vec<(f64, f64)>,
    /// A reference line from one point to another.
    pub line: Option<((f64, f64), (f64, f64))>,
    /// x-axis label.
    pub x_label: String,
    /// y-axis label.
    pub y_label: String,
}

fn bounds(v: impl Iterator<Item = f64>) -> Option<(f64, f64)> {
    let (lo, hi) = v.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
        (a.min(x), b.max(x))
    });
    if !lo.is_finite() || !hi.is_finite() {
        return None;
    }
    let pad = if hi > lo {
        (hi - lo) * 0.06
    } else {
        lo.abs().max(1.0) * 0.1
    };
    Some((lo - pad, hi + pad))
}

fn xy_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    p: &XyPanel,
) -> Option<()> {
    let (x0, x1) = bounds(p.points.iter().map(|q| q.0))?;
    let (y0, y1) = bounds(p.points.iter().map(|q| q.1))?;
    let mut chart = ChartBuilder::on(area)
        .margin(14)
        .caption(p.title.as_str(), ("sans-serif", 14))
        .x_label_area_size(40)
        .y_label_area_size(58)
        .build_cartesian_2d(x0..x1, y0..y1)
        .ok()?;
    mesh(&mut chart.configure_mesh(), 12)
        .x_desc(p.x_label.as_str())
        .y_desc(p.y_label.as_str())
        .draw()
        .ok()?;
    if let Some((a, b)) = p.line {
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![a, b],
                RGBColor(0x6b, 0x6b, 0x6b).stroke_width(1),
            )))
            .ok()?;
    }
    chart
        .draw_series(
            p.points
                .iter()
                .map(|&q| Circle::new(q, 3, PALETTE[0].mix(0.6).filled())),
        )
        .ok()?;
    Some(())
}

/// One or two scatter panels side by side (Q–Q and residual figures).
pub fn draw_panels(panels: &[XyPanel]) -> Option<String> {
    if panels.is_empty() {
        return None;
    }
    let mut buf = String::new();
    {
        let w = 440 * panels.len() as u32;
        let root = SVGBackend::with_string(&mut buf, (w, 380)).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let areas = root.split_evenly((1, panels.len()));
        for (area, p) in areas.iter().zip(panels) {
            xy_panel(area, p)?;
        }
        root.present().ok()?;
    }
    Some(buf)
}

/// One line group of a profile figure: a between group (and levels of other within factors).
#[derive(Debug, Clone)]
pub struct Series {
    /// Legend text.
    pub name: String,
    /// Cell mean at each x level.
    pub means: Vec<f64>,
    /// CI at each x level, if defined.
    pub ci: Vec<Option<(f64, f64)>>,
    /// Each subject's values across the x levels.
    pub subjects: Vec<Vec<f64>>,
}

/// A profile figure: a within factor on x, each subject's line faint, means with CIs bold.
#[derive(Debug, Clone)]
pub struct Profile {
    /// The x levels (a within factor).
    pub x_levels: Vec<String>,
    /// Line groups.
    pub series: Vec<Series>,
    /// x-axis label.
    pub x_label: String,
    /// y-axis label.
    pub y_label: String,
}

/// Draws a profile figure; `None` if it cannot be drawn.
pub fn draw_profile(fig: &Profile) -> Option<String> {
    let k = fig.x_levels.len();
    if k == 0 || fig.series.is_empty() {
        return None;
    }
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for s in &fig.series {
        for v in s.subjects.iter().flatten().chain(&s.means) {
            lo = lo.min(*v);
            hi = hi.max(*v);
        }
        for (a, b) in s.ci.iter().flatten() {
            lo = lo.min(*a);
            hi = hi.max(*b);
        }
    }
    if !lo.is_finite() || !hi.is_finite() {
        return None;
    }
    let pad = if hi > lo {
        (hi - lo) * 0.08
    } else {
        lo.abs().max(1.0) * 0.1
    };
    let (lo, hi) = (lo - pad, hi + pad);
    let m = fig.series.len();
    // Series side by side at each level, so that intervals do not overlap.
    let offset = |si: usize| {
        if m == 1 {
            0.0
        } else {
            (si as f64 - (m - 1) as f64 / 2.0) * (0.25 / m as f64)
        }
    };
    let mut buf = String::new();
    let width = (200 + 110 * k as u32).clamp(420, 900);
    {
        let root = SVGBackend::with_string(&mut buf, (width, 380)).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let mut chart = ChartBuilder::on(&root)
            .margin(14)
            .x_label_area_size(44)
            .y_label_area_size(62)
            .build_cartesian_2d(-0.4f64..(k as f64 - 0.6), lo..hi)
            .ok()?;
        let fmt_x = |_: &f64| String::new();
        mesh(&mut chart.configure_mesh(), 13)
            .disable_x_mesh()
            .x_labels(0)
            .x_label_formatter(&fmt_x)
            .x_desc(fig.x_label.as_str())
            .y_desc(fig.y_label.as_str())
            .draw()
            .ok()?;
        for (si, s) in fig.series.iter().enumerate() {
            let colour = PALETTE[si % PALETTE.len()];
            let dx = offset(si);
            for subj in &s.subjects {
                chart
                    .draw_series(std::iter::once(PathElement::new(
                        subj.iter()
                            .enumerate()
                            .map(|(x, &v)| (x as f64 + dx, v))
                            .collect::<Vec<_>>(),
                        colour.mix(0.22).stroke_width(1),
                    )))
                    .ok()?;
            }
        }
        for (si, s) in fig.series.iter().enumerate() {
            let colour = PALETTE[si % PALETTE.len()];
            let dx = offset(si);
            for (x, ci) in s.ci.iter().enumerate() {
                if let Some((a, b)) = ci {
                    let xm = x as f64 + dx;
                    chart
                        .draw_series(std::iter::once(PathElement::new(
                            vec![(xm, *a), (xm, *b)],
                            colour.stroke_width(2),
                        )))
                        .ok()?;
                }
            }
            chart
                .draw_series(LineSeries::new(
                    s.means.iter().enumerate().map(|(x, &v)| (x as f64 + dx, v)),
                    colour.stroke_width(3),
                ))
                .ok()?
                .label(s.name.clone())
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 18, y)], colour.stroke_width(3))
                });
            chart
                .draw_series(
                    s.means
                        .iter()
                        .enumerate()
                        .map(|(x, &v)| Circle::new((x as f64 + dx, v), 5, colour.filled())),
                )
                .ok()?;
        }
        if m > 1 || !fig.series[0].name.is_empty() {
            legend(&mut chart, SeriesLabelPosition::UpperLeft)?;
        }
        let style =
            TextStyle::from(("sans-serif", 13).into_font()).pos(Pos::new(HPos::Center, VPos::Top));
        for (i, n) in fig.x_levels.iter().enumerate() {
            let (px, py) = chart.backend_coord(&(i as f64, lo));
            root.draw(&Text::new(n.clone(), (px, py + 6), style.clone()))
                .ok()?;
        }
        root.present().ok()?;
    }
    Some(buf)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn profile_draws_subject_lines_and_means() {
        let fig = Profile {
            x_levels: vec!["d1".into(), "d2".into(), "<d3>".into()],
            series: vec![
                Series {
                    name: "low".into(),
                    means: vec![1.0, 2.0, 3.0],
                    ci: vec![Some((0.5, 1.5)), None, Some((2.0, 4.0))],
                    subjects: vec![vec![1.0, 2.5, 3.0], vec![1.0, 1.5, 3.0]],
                },
                Series {
                    name: "high".into(),
                    means: vec![2.0, 3.0, 5.0],
                    ci: vec![None; 3],
                    subjects: vec![vec![2.0, 3.0, 5.0]],
                },
            ],
            x_label: "day".into(),
            y_label: "Length (mm)".into(),
        };
        let s = draw_profile(&fig).unwrap();
        assert!(s.starts_with("<svg"));
        assert!(s.contains("&lt;d3&gt;") && s.contains("low") && s.contains("high"));
        assert!(s.matches("<circle").count() >= 6);
    }

    fn fig(kind: PlotKind, name: &str) -> Figure {
        Figure {
            kind,
            groups: vec![
                Group {
                    name: name.into(),
                    values: vec![1.0, 2.0, 3.0],
                    mean: 2.0,
                    ci: Some((0.5, 3.5)),
                    label: None,
                },
                Group {
                    name: "b".into(),
                    values: vec![2.0, 4.0],
                    mean: 3.0,
                    ci: None,
                    label: None,
                },
            ],
            x_label: "feed".into(),
            y_label: "Weight (g)".into(),
            level: 0.95,
        }
    }

    #[test]
    fn draws_every_kind_with_labels() {
        for (_, kind) in PlotKind::ALL {
            let s = draw(&fig(kind, "a")).unwrap();
            assert!(s.starts_with("<svg"), "{kind:?}");
            assert!(s.contains("Weight (g)"));
            assert!(s.contains(">feed<") || s.contains("feed"));
            assert_eq!(s.matches("<circle").count() >= 5, true);
        }
    }

    #[test]
    fn level_names_are_escaped_in_svg() {
        let s = draw(&fig(PlotKind::Means, "<script>x</script>")).unwrap();
        assert!(!s.contains("<script>"));
        assert!(s.contains("&lt;script&gt;x&lt;/script&gt;"));
        assert!(!s.contains("&amp;lt;"));
    }

    #[test]
    fn jitter_is_deterministic_and_bounded() {
        assert_eq!(jitter(1, 2), jitter(1, 2));
        assert!((0..1000).all(|i| (-0.5..0.5).contains(&jitter(0, i))));
    }
}

/// Intervals around zero: one row per comparison (label, estimate, low, high).
pub fn draw_intervals(
    rows: &[(String, f64, Option<f64>, Option<f64>)],
    x_label: &str,
) -> Option<String> {
    if rows.is_empty() {
        return None;
    }
    let (mut lo, mut hi) = (0.0f64, 0.0f64);
    for (_, e, a, b) in rows {
        lo = lo.min(a.unwrap_or(*e)).min(*e);
        hi = hi.max(b.unwrap_or(*e)).max(*e);
    }
    if !lo.is_finite() || !hi.is_finite() {
        return None;
    }
    let pad = ((hi - lo) * 0.08).max(1e-9);
    let (lo, hi) = (lo - pad, hi + pad);
    let n = rows.len();
    let longest = rows.iter().map(|r| r.0.chars().count()).max().unwrap_or(4) as u32;
    let mut buf = String::new();
    {
        let height = (90 + 26 * n as u32).clamp(180, 1400);
        let root = SVGBackend::with_string(&mut buf, (620, height)).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let mut chart = ChartBuilder::on(&root)
            .margin(14)
            .x_label_area_size(44)
            .y_label_area_size((longest * 7 + 16).clamp(60, 260))
            .build_cartesian_2d(lo..hi, -0.5f64..(n as f64 - 0.5))
            .ok()?;
        let names: Vec<String> = rows.iter().map(|r| r.0.clone()).collect();
        let fmt_y = move |y: &f64| {
            let i = y.round();
            if (y - i).abs() < 1e-6 && i >= 0.0 && (i as usize) < names.len() {
                names[n - 1 - i as usize].clone()
            } else {
                String::new()
            }
        };
        mesh(&mut chart.configure_mesh(), 12)
            .disable_y_mesh()
            .y_labels(n.max(2) * 2 + 1)
            .y_label_formatter(&fmt_y)
            .x_desc(x_label)
            .draw()
            .ok()?;
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(0.0, -0.5), (0.0, n as f64 - 0.5)],
                RGBColor(0x6b, 0x6b, 0x6b).stroke_width(1),
            )))
            .ok()?;
        for (i, (_, e, a, b)) in rows.iter().enumerate() {
            let y = (n - 1 - i) as f64;
            if let (Some(a), Some(b)) = (a, b) {
                chart
                    .draw_series(std::iter::once(PathElement::new(
                        vec![(*a, y), (*b, y)],
                        PALETTE[0].stroke_width(2),
                    )))
                    .ok()?;
            }
            chart
                .draw_series(std::iter::once(Circle::new(
                    (*e, y),
                    4,
                    PALETTE[0].filled(),
                )))
                .ok()?;
        }
        root.present().ok()?;
    }
    Some(buf)
}

/// The randomisation null of F: a density histogram (the last bin holding values beyond
/// `upper` is left out of the bars), the observed F marked and its tail shaded, and the
/// F(df1, df2) density overlaid.
pub fn draw_null(
    bins: &[u64],
    upper: f64,
    f_obs: f64,
    df1: f64,
    df2: f64,
    title: &str,
) -> Option<String> {
    use statrs::distribution::{Continuous, FisherSnedecor};
    let total: u64 = bins.iter().sum();
    let k = bins.len().saturating_sub(1);
    if total == 0 || k == 0 || !(upper > 0.0) {
        return None;
    }
    let w = upper / k as f64;
    let dens: Vec<f64> = bins[..k]
        .iter()
        .map(|&c| c as f64 / (total as f64 * w))
        .collect();
    let fdist = FisherSnedecor::new(df1, df2).ok();
    let curve: Vec<(f64, f64)> = (1..=200)
        .map(|i| {
            let x = upper * i as f64 / 200.0;
            (x, fdist.as_ref().map(|d| d.pdf(x)).unwrap_or(0.0))
        })
        .filter(|p| p.1.is_finite())
        .collect();
    let top = dens
        .iter()
        .copied()
        .chain(curve.iter().map(|p| {
            p.1.min(dens.iter().cloned().fold(0.0, f64::max) * 3.0 + 0.1)
        }))
        .fold(0.0, f64::max)
        * 1.1;
    let x_hi = upper.max(f_obs * 1.05);
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (600, 360)).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let mut chart = ChartBuilder::on(&root)
            .margin(14)
            .caption(title, ("sans-serif", 14))
            .x_label_area_size(40)
            .y_label_area_size(56)
            .build_cartesian_2d(0.0..x_hi, 0.0..top.max(1e-9))
            .ok()?;
        mesh(&mut chart.configure_mesh(), 12)
            .x_desc("F")
            .y_desc("density")
            .draw()
            .ok()?;
        for (i, d) in dens.iter().enumerate() {
            let (a, b) = (i as f64 * w, (i + 1) as f64 * w);
            let colour = if a >= f_obs {
                PALETTE[1].mix(0.85)
            } else {
                PALETTE[0].mix(0.45)
            };
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(a, 0.0), (b, *d)],
                    colour.filled(),
                )))
                .ok()?;
        }
        chart
            .draw_series(LineSeries::new(
                curve.iter().copied().filter(|p| p.1 <= top),
                BLACK.stroke_width(2),
            ))
            .ok()?
            .label(format!(
                "F({}, {}) density",
                super::fmt::df(df1),
                super::fmt::df(df2)
            ))
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], BLACK.stroke_width(2)));
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(f_obs, 0.0), (f_obs, top)],
                PALETTE[3].stroke_width(2),
            )))
            .ok()?
            .label(format!("observed F = {}", super::fmt::stat(f_obs)))
            .legend(|(x, y)| {
                PathElement::new(vec![(x, y), (x + 18, y)], PALETTE[3].stroke_width(2))
            });
        legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        root.present().ok()?;
    }
    Some(buf)
}

/// A line figure: power (or any 0–1 quantity) against n for several curves, one point marked.
pub fn draw_curves(
    curves: &[(String, Vec<(f64, f64)>)],
    point: (f64, f64),
    x_label: &str,
    y_label: &str,
) -> Option<String> {
    let x_max = curves
        .iter()
        .flat_map(|c| c.1.iter().map(|p| p.0))
        .fold(point.0, f64::max);
    let x_min = curves
        .iter()
        .flat_map(|c| c.1.iter().map(|p| p.0))
        .fold(point.0, f64::min);
    if !(x_max > x_min) {
        return None;
    }
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (560, 360)).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let mut chart = ChartBuilder::on(&root)
            .margin(14)
            .x_label_area_size(44)
            .y_label_area_size(56)
            .build_cartesian_2d(x_min..x_max, 0.0f64..1.0)
            .ok()?;
        mesh(&mut chart.configure_mesh(), 13)
            .x_label_formatter(&|x: &f64| format!("{x:.0}"))
            .x_desc(x_label)
            .y_desc(y_label)
            .draw()
            .ok()?;
        for (i, (label, pts)) in curves.iter().enumerate() {
            let colour = PALETTE[i % PALETTE.len()];
            chart
                .draw_series(LineSeries::new(pts.iter().copied(), colour.stroke_width(2)))
                .ok()?
                .label(label.clone())
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 18, y)], colour.stroke_width(2))
                });
        }
        chart
            .draw_series(std::iter::once(Circle::new(point, 6, BLACK.filled())))
            .ok()?;
        legend(&mut chart, SeriesLabelPosition::LowerRight)?;
        root.present().ok()?;
    }
    Some(buf)
}

//! The report's pictures as SVG, drawn with plotters' SVG backend: confusion-matrix heat maps,
//! per-layer SQNR bars and a histogram of per-row score differences.
//!
//! plotters is built without its `ttf` feature, so it needs no system fonts (no fontconfig):
//! text layout uses its built-in estimate and text lands in the SVG as `<text>` elements that
//! the browser sets in its own sans-serif font. Axis labels that must sit at category centres
//! are placed in pixel coordinates (`backend_coord`) on the root area.
use anyhow::{anyhow, Result};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::fidelity::StageFidelity;
use super::metrics::Confusion;

fn ok<T, E: std::fmt::Display>(r: std::result::Result<T, E>) -> Result<T> {
    r.map_err(|e| anyhow!("drawing the report: {e}"))
}

/// A sans-serif font of `size` pixels (plotters writes `size / 1.24` as the SVG font size).
fn font(size: u32) -> TextStyle<'static> {
    ("sans-serif", f64::from(size) * 1.24)
        .into_font()
        .color(&BLACK)
}

fn anchored(size: u32, h: HPos, v: VPos) -> TextStyle<'static> {
    font(size).pos(Pos::new(h, v))
}

/// `a` to `b` by `t` in 0..=1.
fn mix(a: RGBColor, b: RGBColor, t: f64) -> RGBColor {
    let t = t.clamp(0.0, 1.0);
    let m = |x: u8, y: u8| (f64::from(x) + (f64::from(y) - f64::from(x)) * t).round() as u8;
    RGBColor(m(a.0, b.0), m(a.1, b.1), m(a.2, b.2))
}

const PAPER: RGBColor = RGBColor(255, 255, 255);
const RIGHT_FULL: RGBColor = RGBColor(33, 102, 172);
const WRONG_FULL: RGBColor = RGBColor(214, 96, 77);
const BAR: RGBColor = RGBColor(67, 147, 195);

fn svg_string(
    width: u32,
    height: u32,
    draw: impl FnOnce(&DrawingArea<SVGBackend<'_>, Shift>) -> Result<()>,
) -> Result<String> {
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (width, height)).into_drawing_area();
        ok(root.fill(&PAPER))?;
        draw(&root)?;
        ok(root.present())?;
    }
    Ok(buf)
}

/// Estimated width in pixels of `text` set at `px` pixels in a sans-serif font: 0.62 em per
/// character, a little above the average advance of common sans-serif faces (about 0.5–0.6 em
/// for mixed lower case; common practice, no source), so an estimate errs towards room.
fn text_width(text: &str, px: u32) -> u32 {
    (text.chars().count() as f64 * 0.62 * f64::from(px)).ceil() as u32
}

/// Class-label size on the heat maps, in pixels.
const LABEL_PX: u32 = 12;
/// Axis-title size on the heat maps, in pixels.
const TITLE_PX: u32 = 13;
/// Space between a label and what it labels.
const GAP: u32 = 6;

/// Where a heat map's parts go, sized from its labels: the row labels' column is as wide as the
/// longest name, and column labels that do not fit across a cell turn to run downwards.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct HeatLayout {
    cell: u32,
    left: u32,
    top: u32,
    /// Height of the column labels (their width when turned).
    column_labels: u32,
    turned: bool,
    width: u32,
    height: u32,
}

impl HeatLayout {
    fn new(k: usize, names: &[String], title: &str) -> Self {
        let cell = (360 / k.max(1)).clamp(14, 40) as u32;
        let side = cell * k.max(1) as u32;
        let longest = names
            .iter()
            .take(k)
            .map(|n| text_width(n, LABEL_PX))
            .max()
            .unwrap_or(0);
        // Row labels, then the turned axis title beside them.
        let left = longest + GAP + TITLE_PX + 2 * GAP + 4;
        let turned = longest + 4 > cell;
        let column_labels = if turned { longest } else { LABEL_PX + 2 };
        let top = 50;
        let bottom = GAP + column_labels + GAP + TITLE_PX + 2 * GAP;
        let width = (left + side + 20).max(text_width(title, 17) + 20);
        HeatLayout {
            cell,
            left,
            top,
            column_labels,
            turned,
            width,
            height: top + side + bottom,
        }
    }
}

/// A heat map of `c`: each cell's shade is its share of the true class's rows; right answers
/// (the diagonal) in blue, mistakes in red, with the count written in every non-empty cell.
pub fn confusion_svg(c: &Confusion, names: &[String], title: &str) -> Result<String> {
    let k = c.classes().max(1);
    let lay = HeatLayout::new(k, names, title);
    let side = lay.cell * k as u32;
    let (left, top) = (lay.left, lay.top);
    svg_string(lay.width, lay.height, |root| {
        ok(root.draw(&Text::new(
            title.to_string(),
            ((left + side / 2) as i32, 18),
            anchored(17, HPos::Center, VPos::Center),
        )))?;
        let area = root.margin(top, lay.height - top - side, left, lay.width - left - side);
        let kf = k as f64;
        let chart = ok(ChartBuilder::on(&area).build_cartesian_2d(0f64..kf, 0f64..kf))?;
        let totals: Vec<u64> = c.counts.iter().map(|r| r.iter().sum()).collect();
        let mut cells = Vec::new();
        let mut labels = Vec::new();
        for (t, row) in c.counts.iter().enumerate() {
            for (p, &n) in row.iter().enumerate() {
                let share = if totals.get(t).copied().unwrap_or(0) == 0 {
                    0.0
                } else {
                    n as f64 / totals.get(t).copied().unwrap_or(1) as f64
                };
                let shade = if n == 0 {
                    PAPER
                } else if t == p {
                    mix(PAPER, RIGHT_FULL, 0.15 + 0.85 * share)
                } else {
                    mix(PAPER, WRONG_FULL, 0.35 + 0.65 * share)
                };
                let (x, y) = (p as f64, kf - 1.0 - t as f64);
                cells.push(Rectangle::new([(x, y), (x + 1.0, y + 1.0)], shade.filled()));
                if n > 0 {
                    let colour: &'static RGBColor = if t == p && share > 0.5 {
                        &WHITE
                    } else {
                        &BLACK
                    };
                    labels.push(Text::new(
                        n.to_string(),
                        (x + 0.5, y + 0.5),
                        anchored(12, HPos::Center, VPos::Center).color(colour),
                    ));
                }
            }
        }
        let grid = RGBColor(220, 220, 220);
        let mut lines = Vec::new();
        for i in 0..=k {
            let v = i as f64;
            lines.push(PathElement::new(vec![(v, 0.0), (v, kf)], grid));
            lines.push(PathElement::new(vec![(0.0, v), (kf, v)], grid));
        }
        let mut chart = chart;
        ok(chart.draw_series(cells))?;
        ok(chart.draw_series(lines))?;
        ok(chart.draw_series(labels))?;
        let gap = GAP as i32;
        for (i, name) in names.iter().enumerate().take(k) {
            let centre = i as f64 + 0.5;
            let (x, y) = chart.backend_coord(&(centre, 0.0));
            let style = if lay.turned {
                anchored(LABEL_PX, HPos::Left, VPos::Center).transform(FontTransform::Rotate90)
            } else {
                anchored(LABEL_PX, HPos::Center, VPos::Top)
            };
            ok(root.draw(&Text::new(name.clone(), (x, y + gap), style)))?;
            let (x, y) = chart.backend_coord(&(0.0, kf - centre));
            ok(root.draw(&Text::new(
                name.clone(),
                (x - gap, y),
                anchored(LABEL_PX, HPos::Right, VPos::Center),
            )))?;
        }
        let (x0, y0) = chart.backend_coord(&(kf / 2.0, 0.0));
        ok(root.draw(&Text::new(
            "predicted class",
            (x0, y0 + gap + lay.column_labels as i32 + gap),
            anchored(TITLE_PX, HPos::Center, VPos::Top),
        )))?;
        let (_, y1) = chart.backend_coord(&(0.0, kf / 2.0));
        ok(root.draw(&Text::new(
            "true class",
            ((GAP + TITLE_PX / 2) as i32, y1),
            anchored(TITLE_PX, HPos::Center, VPos::Center).transform(FontTransform::Rotate270),
        )))?;
        Ok(())
    })
}

/// Horizontal bars of each tensor's SQNR in dB, the value written at the end of each bar.
pub fn sqnr_svg(stages: &[StageFidelity]) -> Result<String> {
    let n = stages.len().max(1);
    let bar = 34u32;
    let (left, top, width) = (230u32, 40u32, 760u32);
    let height = top + bar * n as u32 + 60;
    let max = stages
        .iter()
        .filter_map(|s| s.sqnr_db)
        .fold(10.0f64, f64::max);
    let x_max = (max / 10.0).ceil() * 10.0 + 5.0;
    svg_string(width, height, |root| {
        ok(root.draw(&Text::new(
            "Per-layer SQNR of int8 against float (dB, higher is closer)",
            ((width / 2) as i32, 16),
            anchored(16, HPos::Center, VPos::Center),
        )))?;
        let area = root.margin(top, 40, left, 30);
        let nf = n as f64;
        let mut chart = ok(ChartBuilder::on(&area)
            .x_label_area_size(30)
            .build_cartesian_2d(0f64..x_max, 0f64..nf))?;
        ok(chart
            .configure_mesh()
            .disable_y_mesh()
            .light_line_style(TRANSPARENT)
            .disable_y_axis()
            .x_label_style(font(12))
            .draw())?;
        for (i, s) in stages.iter().enumerate() {
            let y = nf - 1.0 - i as f64;
            let (label, value) = match s.sqnr_db {
                Some(db) => (format!(" {db:.1} dB"), db.max(0.0)),
                None => (s.note.clone().unwrap_or_else(|| "undefined".into()), 0.0),
            };
            ok(chart.draw_series(std::iter::once(Rectangle::new(
                [(0.0, y + 0.2), (value, y + 0.8)],
                BAR.filled(),
            ))))?;
            ok(chart.draw_series(std::iter::once(Text::new(
                label,
                (value, y + 0.5),
                anchored(12, HPos::Left, VPos::Center),
            ))))?;
            let (px, py) = chart.backend_coord(&(0.0, y + 0.5));
            ok(root.draw(&Text::new(
                s.name.clone(),
                (px - 8, py),
                anchored(12, HPos::Right, VPos::Center),
            )))?;
        }
        Ok(())
    })
}

/// A histogram of the per-row largest score difference `max_c |p_float − p_int8|`.
pub fn score_diff_svg(diffs: &[f64], unit: &str) -> Result<String> {
    const BINS: usize = 40;
    let top = diffs.iter().copied().fold(0.0f64, f64::max);
    let hi = if top > 0.0 { top * 1.0001 } else { 1e-6 };
    let width_bin = hi / BINS as f64;
    let mut counts = [0u64; BINS];
    for &d in diffs {
        let b = ((d / width_bin) as usize).min(BINS - 1);
        if let Some(c) = counts.get_mut(b) {
            *c += 1;
        }
    }
    // Rows on a log scale, so a tail of a few rows shows next to a bin of hundreds.
    let y_max = counts.iter().copied().max().unwrap_or(1).max(1) as f64 * 1.5;
    let (w, h) = (760u32, 360u32);
    svg_string(w, h, |root| {
        ok(root.draw(&Text::new(
            format!(
                "Largest score difference per row ({unit}), {} rows",
                diffs.len()
            ),
            ((w / 2) as i32, 16),
            anchored(16, HPos::Center, VPos::Center),
        )))?;
        let area = root.margin(34, 10, 10, 30);
        let mut chart = ok(ChartBuilder::on(&area)
            .x_label_area_size(40)
            .y_label_area_size(60)
            .build_cartesian_2d(0f64..hi, (0.8f64..y_max).log_scale()))?;
        ok(chart
            .configure_mesh()
            .disable_x_mesh()
            .light_line_style(TRANSPARENT)
            .x_desc("max |float − int8| over the row's scores")
            .y_desc("rows (log scale)")
            .x_label_formatter(&|v| format!("{v:.2e}"))
            .y_label_formatter(&|v| format!("{v:.0}"))
            .x_label_style(font(11))
            .y_label_style(font(11))
            .axis_desc_style(font(13))
            .draw())?;
        ok(chart.draw_series(
            counts
                .iter()
                .enumerate()
                .filter(|(_, &c)| c > 0)
                .map(|(i, &c)| {
                    let x = i as f64 * width_bin;
                    Rectangle::new([(x, 0.8), (x + width_bin, c as f64)], BAR.filled())
                }),
        ))?;
        Ok(())
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::vet::fidelity::Energy;

    /// plotters writes each text on its own line inside `<text>`.
    fn has_text(svg: &str, t: &str) -> usize {
        svg.matches(&format!(">\n{t}\n</text>")).count()
    }

    #[test]
    fn heat_map_writes_counts_and_names() {
        let c = Confusion::new(2, &[0, 0, 1], &[0, 1, 1]);
        let svg = confusion_svg(&c, &["cat".into(), "dog".into()], "float").unwrap();
        assert!(svg.starts_with("<svg"), "{}", &svg[..40]);
        // Each name on both axes.
        assert_eq!((has_text(&svg, "cat"), has_text(&svg, "dog")), (2, 2));
        assert_eq!(has_text(&svg, "predicted class"), 1);
        // Three non-empty cells, three counts written; white: the background, the empty cell
        // and the count on the fully blue diagonal cell.
        assert_eq!(has_text(&svg, "1"), 3);
        assert_eq!(svg.matches("fill=\"#FFFFFF\"").count(), 3, "{svg}");
    }

    #[test]
    fn heat_map_room_follows_the_labels() {
        let short: Vec<String> = ["a", "b"].map(String::from).into();
        let long: Vec<String> = ["outer_race_bearing_wear", "b"].map(String::from).into();
        let s = HeatLayout::new(2, &short, "float");
        let l = HeatLayout::new(2, &long, "float");
        assert!(!s.turned && l.turned, "{s:?} {l:?}");
        assert!(l.left >= text_width("outer_race_bearing_wear", LABEL_PX) + GAP);
        assert_eq!(
            l.left - s.left,
            text_width("outer_race_bearing_wear", LABEL_PX) - text_width("a", LABEL_PX)
        );
        assert_eq!(
            l.column_labels,
            text_width("outer_race_bearing_wear", LABEL_PX)
        );
        // Ten classes: 36-pixel cells hold a two-character name across, not an eleven-character one.
        let digits: Vec<String> = (0..10).map(|k| k.to_string()).collect();
        assert!(!HeatLayout::new(10, &digits, "int8").turned);
        let words: Vec<String> = (0..10).map(|k| format!("digit_{k}_name")).collect();
        assert!(HeatLayout::new(10, &words, "int8").turned);
    }

    #[test]
    fn bars_and_histogram_render() {
        let e = Energy {
            signal: 100.0,
            noise: 1.0,
            round_noise: 1.0,
            ..Energy::default()
        };
        let s = vec![StageFidelity::new(0, "input".into(), 4, e)];
        let svg = sqnr_svg(&s).unwrap();
        assert_eq!(has_text(&svg, " 20.0 dB"), 1, "{svg}");
        let h = score_diff_svg(&[0.0, 0.01, 0.02, 0.02], "softmax probabilities").unwrap();
        assert!(h.contains("4 rows"));
    }
}

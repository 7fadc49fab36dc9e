//! Layout: turns a [`Figure`] into a [`DisplayList`] in page pt. Margins follow from the measured
//! tick-label and axis-label extents; tick density follows from the space the labels need.

use super::draw::{DisplayList, Item, Stroke};
use super::geom::{clip_polyline, simplify_polyline, Rect};
use super::heatmap::{resolve_mapping, validate, ColorMapping};
use super::labels::{place_labels, LabelRequest};
use super::scene::{
    AxisFn, ColorScale, Corner, Figure, LineStyle, MarkerShape, MarkerStyle, Panel, Swatch,
    MM_PER_PT,
};
use super::text::{self, TextBlock};
use super::ticks::{linear_ticks, log_ticks, symlog_ticks, TickSet};
use fanmark_core::{Error, Result};

/// Tick length, pt.
pub const TICK_LEN: f64 = 3.0;
/// Width of ticks and frames, pt.
pub const FRAME_WIDTH: f64 = 0.6;
/// Gap between a tick and its label, pt.
const TICK_PAD: f64 = 2.0;
/// Gap between tick labels and the axis label, pt.
const LABEL_PAD: f64 = 3.0;
/// Gap at the outer edge of a panel cell, pt.
const OUTER: f64 = 3.0;
/// Gap between the plot (or right axis) and the colour bar, pt.
const BAR_GAP: f64 = 6.0;
const BLACK: [u8; 3] = [0, 0, 0];

fn frame_stroke() -> Stroke {
    Stroke {
        color: BLACK,
        width: FRAME_WIDTH,
        dash: Vec::new(),
    }
}

fn stroke_of(style: &LineStyle) -> Stroke {
    Stroke {
        color: style.color,
        width: style.width_pt,
        dash: style.dash_pt.clone(),
    }
}

fn line_item(points: Vec<(f64, f64)>, stroke: Stroke, clip: Option<Rect>) -> Item {
    Item::Path {
        points,
        closed: false,
        fill: None,
        stroke: Some(stroke),
        clip,
    }
}

fn rect_points(r: &Rect) -> Vec<(f64, f64)> {
    vec![(r.x0, r.y0), (r.x1, r.y0), (r.x1, r.y1), (r.x0, r.y1)]
}

/// Ticks that fit along `length` pt: as many as possible up to 10 without labels touching.
/// `along` gives the label extent along the axis (width for horizontal axes, height for
/// vertical ones).
fn fitted_ticks(
    make: &dyn Fn(usize) -> TickSet,
    length: f64,
    fs: f64,
    along: &dyn Fn(&TextBlock) -> f64,
) -> TickSet {
    let mut n = 10usize;
    loop {
        let t = make(n);
        let widest = t
            .ticks
            .iter()
            .map(|tk| along(&text::layout(&tk.label, fs)))
            .fold(0.0, f64::max);
        let need = t.ticks.len() as f64 * (widest + 1.2 * fs);
        if need <= length || n <= 2 {
            return t;
        }
        n = (t.ticks.len().saturating_sub(1)).clamp(2, n - 1);
    }
}

/// Check that a secondary-axis map is finite and strictly monotone over (a, b).
fn check_monotone(f: &AxisFn, a: f64, b: f64, what: &str) -> Result<()> {
    let v: Vec<f64> = (0..=64).map(|i| f(a + (b - a) * i as f64 / 64.0)).collect();
    let up = v[64] > v[0];
    if v.iter().any(|x| !x.is_finite())
        || !v
            .windows(2)
            .all(|w| if up { w[1] > w[0] } else { w[1] < w[0] })
    {
        return Err(Error::invalid(
            what,
            "the secondary-axis function must be finite and strictly monotone over the axis range",
        ));
    }
    Ok(())
}

/// Solve f(p) = s for p in (a, b) by bisection (f monotone).
fn invert(f: &AxisFn, a: f64, b: f64, s: f64) -> f64 {
    let (mut lo, mut hi) = (a, b);
    let up = f(b) > f(a);
    for _ in 0..80 {
        let m = 0.5 * (lo + hi);
        if (f(m) < s) == up {
            lo = m;
        } else {
            hi = m;
        }
    }
    0.5 * (lo + hi)
}

/// A secondary axis resolved: tick positions in primary units, labels, and the label markup.
struct Secondary {
    ticks: Vec<(f64, String)>,
    label: String,
}

fn with_factor(label: &str, t: &TickSet) -> String {
    let f = t.factor_markup();
    if f.is_empty() {
        label.to_string()
    } else {
        format!("{label}  {f}")
    }
}

/// Lay out the figure. Errors name the panel and field at fault.
pub fn layout(fig: &Figure) -> Result<DisplayList> {
    let positive = |v: f64| v.is_finite() && v > 0.0;
    if !positive(fig.width_mm) || !positive(fig.height_mm) || !positive(fig.dpi) {
        return Err(Error::invalid(
            "figure",
            format!(
                "size and dpi must be positive, got {} mm × {} mm at {} dpi",
                fig.width_mm, fig.height_mm, fig.dpi
            ),
        ));
    }
    if !(fig.font_pt >= 4.0 && fig.font_pt <= 72.0) {
        return Err(Error::invalid(
            "figure font size",
            format!("expected 4…72 pt, got {}", fig.font_pt),
        ));
    }
    let (w, h) = (fig.width_pt(), fig.height_pt());
    let mut items = Vec::new();
    let mut top = 0.0;
    if !fig.title.is_empty() {
        let b = text::layout(&fig.title, fig.font_pt * 1.2);
        let y = OUTER + b.ascent;
        top = y + b.descent + 1.0;
        items.push(Item::Text {
            x: (w - b.width) / 2.0,
            y,
            block: b,
            vertical: false,
            color: BLACK,
        });
    }
    let cols = fig.columns.max(1);
    let rows = fig.panels.len().div_ceil(cols).max(1);
    let (cw, ch) = (w / cols as f64, (h - top) / rows as f64);
    let mut dropped = 0;
    let mut mappings = Vec::new();
    for (i, p) in fig.panels.iter().enumerate() {
        let (r, c) = (i / cols, i % cols);
        let cell = Rect::new(
            c as f64 * cw,
            top + r as f64 * ch,
            (c + 1) as f64 * cw,
            top + (r + 1) as f64 * ch,
        );
        let (d, m) = layout_panel(fig, i, p, &cell, &mut items)
            .map_err(|e| Error::invalid(format!("panel {}", i + 1), e.to_string()))?;
        dropped += d;
        mappings.push(m);
    }
    Ok(DisplayList {
        width: w,
        height: h,
        items,
        dropped_labels: dropped,
        mappings,
    })
}

fn colorbar_ticks(m: &ColorMapping, n: usize) -> TickSet {
    match m.scale {
        ColorScale::Linear => linear_ticks(m.lo, m.hi, n),
        ColorScale::Log => log_ticks(m.lo, m.hi, n),
        ColorScale::SymLog { linear_threshold } => symlog_ticks(m.lo, m.hi, linear_threshold, n),
    }
}

fn layout_panel(
    fig: &Figure,
    index: usize,
    p: &Panel,
    cell: &Rect,
    items: &mut Vec<Item>,
) -> Result<(usize, Option<ColorMapping>)> {
    let fs = fig.font_pt;
    let (xa, xb) = p.x_axis.range;
    let (ya, yb) = p.y_axis.range;
    for (name, a, b) in [("x axis range", xa, xb), ("y axis range", ya, yb)] {
        if !a.is_finite() || !b.is_finite() || a == b {
            return Err(Error::invalid(
                name,
                format!("expected two different finite limits, got {a}, {b}"),
            ));
        }
    }
    if let Some(t) = &p.top_axis {
        check_monotone(&t.map, xa, xb, "top axis")?;
    }
    if let Some(t) = &p.right_axis {
        check_monotone(&t.map, ya, yb, "right axis")?;
    }
    validate_styles(p)?;
    let mapping = match &p.heatmap {
        Some(hm) => {
            validate(hm)?;
            Some(resolve_mapping(hm)?)
        }
        None => None,
    };
    if p.colorbar.is_some() && mapping.is_none() {
        return Err(Error::invalid(
            "colour bar",
            "a colour bar needs a heat map",
        ));
    }

    let width_of = |b: &TextBlock| b.width;
    let height_of = |b: &TextBlock| b.height();
    let secondary = |f: &AxisFn, a: f64, b: f64, len: f64, along: &dyn Fn(&TextBlock) -> f64| {
        let (sa, sb) = (f(a), f(b));
        let t = fitted_ticks(&|n| linear_ticks(sa, sb, n), len, fs, along);
        let (slo, shi) = (sa.min(sb), sa.max(sb));
        let ticks = t
            .ticks
            .iter()
            .filter(|tk| tk.value >= slo && tk.value <= shi)
            .map(|tk| (invert(f, a, b, tk.value), tk.label.clone()))
            .collect::<Vec<_>>();
        (ticks, t)
    };

    // Two passes: ticks depend on the plot size, margins on the tick labels.
    let mut plot = Rect::new(
        cell.x0 + 8.0 * fs,
        cell.y0 + 2.0 * fs,
        cell.x1 - 2.0 * fs,
        cell.y1 - 5.0 * fs,
    );
    let mut result = None;
    for _ in 0..2 {
        if plot.width() < 10.0 || plot.height() < 10.0 {
            return Err(Error::invalid(
                "layout",
                format!(
                    "the panel is too small for its labels ({:.0} × {:.0} mm cell)",
                    cell.width() * MM_PER_PT,
                    cell.height() * MM_PER_PT
                ),
            ));
        }
        let xt = fitted_ticks(&|n| linear_ticks(xa, xb, n), plot.width(), fs, &width_of);
        let yt = fitted_ticks(&|n| linear_ticks(ya, yb, n), plot.height(), fs, &height_of);
        let top_ax = p.top_axis.as_ref().map(|s| {
            let (ticks, t) = secondary(&s.map, xa, xb, plot.width(), &width_of);
            Secondary {
                ticks,
                label: with_factor(&s.label, &t),
            }
        });
        let right_ax = p.right_axis.as_ref().map(|s| {
            let (ticks, t) = secondary(&s.map, ya, yb, plot.height(), &height_of);
            Secondary {
                ticks,
                label: with_factor(&s.label, &t),
            }
        });
        let cbt = mapping
            .map(|m| fitted_ticks(&|n| colorbar_ticks(&m, n), plot.height(), fs, &height_of));

        let blocks = |labels: &mut dyn Iterator<Item = &String>| -> Vec<TextBlock> {
            labels.map(|l| text::layout(l, fs)).collect()
        };
        let max_w = |b: &[TextBlock]| b.iter().map(|b| b.width).fold(0.0, f64::max);
        let max_h = |b: &[TextBlock]| b.iter().map(|b| b.height()).fold(0.0, f64::max);
        let xtb = blocks(&mut xt.ticks.iter().map(|t| &t.label));
        let ytb = blocks(&mut yt.ticks.iter().map(|t| &t.label));
        let xl = text::layout(&with_factor(&p.x_axis.label, &xt), fs);
        let yl = text::layout(&with_factor(&p.y_axis.label, &yt), fs);

        let left = OUTER + yl.height() + LABEL_PAD + max_w(&ytb) + TICK_PAD + TICK_LEN;
        let bottom = TICK_LEN + TICK_PAD + max_h(&xtb) + LABEL_PAD + xl.height() + OUTER;
        let mut top = OUTER + max_h(&ytb) / 2.0;
        let top_blocks = top_ax.as_ref().map(|s| {
            let tb = blocks(&mut s.ticks.iter().map(|t| &t.1));
            let lb = text::layout(&s.label, fs);
            top = TICK_LEN + TICK_PAD + max_h(&tb) + LABEL_PAD + lb.height() + OUTER;
            (tb, lb)
        });
        let mut right = OUTER + xtb.last().map(|b| b.width / 2.0).unwrap_or(0.0);
        let mut extent = 0.0;
        let right_blocks = right_ax.as_ref().map(|s| {
            let tb = blocks(&mut s.ticks.iter().map(|t| &t.1));
            let lb = text::layout(&s.label, fs);
            extent = TICK_LEN + TICK_PAD + max_w(&tb) + LABEL_PAD + lb.height();
            (tb, lb)
        });
        if right_blocks.is_some() {
            right = extent + OUTER;
        }
        let bar = match (&p.colorbar, &cbt) {
            (Some(cb), Some(t)) => {
                let tb = blocks(&mut t.ticks.iter().map(|t| &t.label));
                let lb = text::layout(&with_factor(&cb.label, t), fs);
                let bw = cb.width_mm / MM_PER_PT;
                right = extent
                    + BAR_GAP
                    + bw
                    + TICK_LEN
                    + TICK_PAD
                    + max_w(&tb)
                    + LABEL_PAD
                    + lb.height()
                    + OUTER;
                Some((tb, lb, bw))
            }
            _ => None,
        };
        plot = Rect::new(
            cell.x0 + left,
            cell.y0 + top,
            cell.x1 - right,
            cell.y1 - bottom,
        );
        result = Some((
            xt,
            yt,
            xtb,
            ytb,
            xl,
            yl,
            top_ax,
            top_blocks,
            right_ax,
            right_blocks,
            extent,
            cbt,
            bar,
        ));
    }
    if plot.width() < 10.0 || plot.height() < 10.0 {
        return Err(Error::invalid(
            "layout",
            "the panel is too small for its labels; enlarge the figure or shorten the labels",
        ));
    }
    let (xt, yt, xtb, ytb, xl, yl, top_ax, top_blocks, right_ax, right_blocks, extent, cbt, bar) =
        result.expect("two passes ran");
    let r = plot;
    let px = |x: f64| r.x0 + (x - xa) / (xb - xa) * r.width();
    let py = |y: f64| r.y1 - (y - ya) / (yb - ya) * r.height();

    // Heat map, then overlays.
    if p.heatmap.is_some() {
        items.push(Item::HeatMap {
            panel: index,
            rect: r,
        });
    }
    data_items(p, &r, 0.0, items);
    items.push(plot_frame_item(&r));

    // Bottom and left axes.
    let tick = |a: (f64, f64), b: (f64, f64)| line_item(vec![a, b], frame_stroke(), None);
    for (t, b) in xt.ticks.iter().zip(xtb) {
        let x = px(t.value);
        items.push(tick((x, r.y1), (x, r.y1 + TICK_LEN)));
        let y = r.y1 + TICK_LEN + TICK_PAD + b.ascent;
        push_text(items, b, x, y, 0.5, false);
    }
    let x_tick_h = xt
        .ticks
        .iter()
        .map(|t| text::layout(&t.label, fs).height())
        .fold(0.0, f64::max);
    let y = r.y1 + TICK_LEN + TICK_PAD + x_tick_h + LABEL_PAD + xl.ascent;
    push_text(items, xl, (r.x0 + r.x1) / 2.0, y, 0.5, false);
    let mut y_tick_w: f64 = 0.0;
    for (t, b) in yt.ticks.iter().zip(ytb) {
        let y = py(t.value);
        items.push(tick((r.x0 - TICK_LEN, y), (r.x0, y)));
        y_tick_w = y_tick_w.max(b.width);
        let base = y + (b.ascent - b.descent) / 2.0;
        push_text(items, b, r.x0 - TICK_LEN - TICK_PAD, base, 1.0, false);
    }
    let bx = r.x0 - TICK_LEN - TICK_PAD - y_tick_w - LABEL_PAD - yl.descent;
    push_text(items, yl, bx, (r.y0 + r.y1) / 2.0, 0.5, true);

    // Secondary axes.
    if let (Some(s), Some((tb, lb))) = (top_ax, top_blocks) {
        let mut h: f64 = 0.0;
        for ((pos, _), b) in s.ticks.iter().zip(tb) {
            let x = px(*pos);
            items.push(tick((x, r.y0 - TICK_LEN), (x, r.y0)));
            h = h.max(b.height());
            let base = r.y0 - TICK_LEN - TICK_PAD - b.descent;
            push_text(items, b, x, base, 0.5, false);
        }
        let base = r.y0 - TICK_LEN - TICK_PAD - h - LABEL_PAD - lb.descent;
        push_text(items, lb, (r.x0 + r.x1) / 2.0, base, 0.5, false);
    }
    if let (Some(s), Some((tb, lb))) = (right_ax, right_blocks) {
        let mut wmax: f64 = 0.0;
        for ((pos, _), b) in s.ticks.iter().zip(tb) {
            let y = py(*pos);
            items.push(tick((r.x1, y), (r.x1 + TICK_LEN, y)));
            wmax = wmax.max(b.width);
            let base = y + (b.ascent - b.descent) / 2.0;
            push_text(items, b, r.x1 + TICK_LEN + TICK_PAD, base, 0.0, false);
        }
        let bx = r.x1 + TICK_LEN + TICK_PAD + wmax + LABEL_PAD + lb.ascent;
        push_text(items, lb, bx, (r.y0 + r.y1) / 2.0, 0.5, true);
    }

    // Colour bar.
    if let (Some((tb, lb, bw)), Some(t), Some(m)) = (bar, cbt, mapping) {
        let x0 = r.x1 + extent + BAR_GAP;
        let cb = Rect::new(x0, r.y0, x0 + bw, r.y1);
        items.push(Item::ColorStrip {
            panel: index,
            rect: cb,
        });
        items.push(Item::Path {
            points: rect_points(&cb),
            closed: true,
            fill: None,
            stroke: Some(frame_stroke()),
            clip: None,
        });
        let mut wmax: f64 = 0.0;
        for (tk, b) in t.ticks.iter().zip(tb) {
            let Some(pos) = m.position(tk.value) else {
                continue;
            };
            let y = cb.y1 - pos * cb.height();
            items.push(tick((cb.x1, y), (cb.x1 + TICK_LEN, y)));
            wmax = wmax.max(b.width);
            let base = y + (b.ascent - b.descent) / 2.0;
            push_text(items, b, cb.x1 + TICK_LEN + TICK_PAD, base, 0.0, false);
        }
        let bx = cb.x1 + TICK_LEN + TICK_PAD + wmax + LABEL_PAD + lb.ascent;
        push_text(items, lb, bx, (cb.y0 + cb.y1) / 2.0, 0.5, true);
    }

    // Legend box (an obstacle for labels), then labels, then the legend on top.
    let legend = p
        .legend
        .as_ref()
        .filter(|l| !l.entries.is_empty())
        .map(|l| {
            let pad = 3.0;
            let sw = 12.0;
            let blocks: Vec<TextBlock> = l
                .entries
                .iter()
                .map(|e| text::layout(&e.text, fs))
                .collect();
            let row = blocks.iter().map(|b| b.height()).fold(fs, f64::max) + 2.0;
            let bw = pad * 2.0 + sw + 3.0 + blocks.iter().map(|b| b.width).fold(0.0, f64::max);
            let bh = pad * 2.0 + row * blocks.len() as f64;
            let inset = 4.0;
            let (x0, y0) = match l.corner {
                Corner::TopLeft => (r.x0 + inset, r.y0 + inset),
                Corner::TopRight => (r.x1 - inset - bw, r.y0 + inset),
                Corner::BottomLeft => (r.x0 + inset, r.y1 - inset - bh),
                Corner::BottomRight => (r.x1 - inset - bw, r.y1 - inset - bh),
            };
            (Rect::new(x0, y0, x0 + bw, y0 + bh), blocks, row, pad, sw, l)
        });
    let obstacles: Vec<Rect> = legend.iter().map(|l| l.0).collect();
    let dropped = label_items(p, &r, &obstacles, items);
    if let Some((lr, blocks, row, lpad, sw, l)) = legend {
        items.push(Item::Path {
            points: rect_points(&lr),
            closed: true,
            fill: Some([255, 255, 255]),
            stroke: Some(Stroke {
                color: [110, 110, 110],
                width: 0.4,
                dash: Vec::new(),
            }),
            clip: None,
        });
        for (k, (e, b)) in l.entries.iter().zip(blocks).enumerate() {
            let cy = lr.y0 + lpad + row * (k as f64 + 0.5);
            let sx = lr.x0 + lpad;
            match &e.swatch {
                Swatch::Line(s) => {
                    if let Some(o) = s.outline {
                        let mut st = stroke_of(s);
                        st.color = o;
                        st.width += 1.2;
                        items.push(line_item(vec![(sx, cy), (sx + sw, cy)], st, None));
                    }
                    items.push(line_item(vec![(sx, cy), (sx + sw, cy)], stroke_of(s), None));
                }
                Swatch::Marker(m) => items.extend(marker_items(m, sx + sw / 2.0, cy, None)),
            }
            let base = cy + (b.ascent - b.descent) / 2.0;
            push_text(items, b, sx + sw + 3.0, base, 0.0, false);
        }
    }
    Ok((dropped, mapping))
}

/// Map a point of the panel's axes (data units) to page pt inside the plot rectangle `r`.
fn page_point(p: &Panel, r: &Rect, (x, y): (f64, f64)) -> (f64, f64) {
    let (xa, xb) = p.x_axis.range;
    let (ya, yb) = p.y_axis.range;
    (
        r.x0 + (x - xa) / (xb - xa) * r.width(),
        r.y1 - (y - ya) / (yb - ya) * r.height(),
    )
}

/// The frame drawn around a plot rectangle `r` (page pt).
pub fn plot_frame_item(r: &Rect) -> Item {
    Item::Path {
        points: rect_points(r),
        closed: true,
        fill: None,
        stroke: Some(frame_stroke()),
        clip: None,
    }
}

/// True when `item` is the frame [`plot_frame_item`] draws around `r`.
pub fn is_plot_frame(item: &Item, r: &Rect) -> bool {
    matches!(item, Item::Path { points, closed: true, fill: None, clip: None, .. }
        if *points == rect_points(r))
}

/// The panel's data overlay in the plot rectangle `r` (page pt): every line's outline, then
/// every line, then the markers inside `r`, all clipped to `r`. With `simplify_pt` > 0 each
/// polyline keeps only the vertices needed to stay within that distance (pt) of it.
pub fn data_items(p: &Panel, r: &Rect, simplify_pt: f64, items: &mut Vec<Item>) {
    type Parts = Vec<Vec<(f64, f64)>>;
    let page_lines: Vec<(Parts, &LineStyle)> = p
        .lines
        .iter()
        .map(|l| {
            let pts: Vec<(f64, f64)> = l.points.iter().map(|&q| page_point(p, r, q)).collect();
            let parts = clip_polyline(&pts, r)
                .into_iter()
                .map(|part| simplify_polyline(&part, simplify_pt))
                .collect();
            (parts, &l.style)
        })
        .collect();
    for (parts, style) in &page_lines {
        if let Some(o) = style.outline {
            for part in parts {
                let mut s = stroke_of(style);
                s.color = o;
                s.width += 1.2;
                items.push(line_item(part.clone(), s, Some(*r)));
            }
        }
    }
    for (parts, style) in &page_lines {
        for part in parts {
            items.push(line_item(part.clone(), stroke_of(style), Some(*r)));
        }
    }
    for m in &p.markers {
        for &q in &m.points {
            let (cx, cy) = page_point(p, r, q);
            if r.contains(cx, cy) {
                items.extend(marker_items(&m.style, cx, cy, Some(*r)));
            }
        }
    }
}

/// The panel's text labels placed inside the plot rectangle `r` (page pt) clear of each other
/// and of `obstacles`: background boxes and text. Returns how many could not be placed.
pub fn label_items(p: &Panel, r: &Rect, obstacles: &[Rect], items: &mut Vec<Item>) -> usize {
    let label_blocks: Vec<TextBlock> = p
        .labels
        .iter()
        .map(|l| text::layout(&l.text, l.size_pt))
        .collect();
    let pad = 0.8;
    let requests: Vec<LabelRequest> = p
        .labels
        .iter()
        .zip(&label_blocks)
        .map(|(l, b)| LabelRequest {
            width: b.width + 2.0 * pad,
            height: b.height() + 2.0 * pad,
            anchors: l.anchors.iter().map(|&q| page_point(p, r, q)).collect(),
        })
        .collect();
    let bounds = Rect::new(r.x0 + 1.0, r.y0 + 1.0, r.x1 - 1.0, r.y1 - 1.0);
    let placement = place_labels(&requests, &bounds, obstacles, 1.5);
    for ((l, b), bx) in p.labels.iter().zip(label_blocks).zip(&placement.boxes) {
        let Some(bx) = bx else { continue };
        if let Some(bg) = l.background {
            items.push(Item::Path {
                points: rect_points(bx),
                closed: true,
                fill: Some(bg),
                stroke: None,
                clip: None,
            });
        }
        items.push(Item::Text {
            x: bx.x0 + pad,
            y: bx.y0 + pad + b.ascent,
            block: b,
            vertical: false,
            color: l.color,
        });
    }
    placement.dropped
}

/// Check the sizes in a panel's overlay styles: widths ≥ 0, dashes and sizes > 0, all finite.
fn validate_styles(p: &Panel) -> Result<()> {
    let ok_width = |w: f64| w.is_finite() && w >= 0.0;
    let ok_size = |s: f64| s.is_finite() && s > 0.0 && s <= 200.0;
    let check_line = |s: &LineStyle, what: String| {
        if !ok_width(s.width_pt) || s.dash_pt.iter().any(|d| !ok_size(*d)) {
            Err(Error::invalid(
                what,
                format!(
                    "expected a finite width ≥ 0 pt and dash lengths > 0 pt, got {} pt, {:?}",
                    s.width_pt, s.dash_pt
                ),
            ))
        } else {
            Ok(())
        }
    };
    let check_marker = |m: &MarkerStyle, what: String| {
        if ok_size(m.size_pt) {
            Ok(())
        } else {
            Err(Error::invalid(
                what,
                format!("marker size must be 0…200 pt, got {}", m.size_pt),
            ))
        }
    };
    for (k, l) in p.lines.iter().enumerate() {
        check_line(&l.style, format!("line {}", k + 1))?;
    }
    for (k, m) in p.markers.iter().enumerate() {
        check_marker(&m.style, format!("marker set {}", k + 1))?;
    }
    for (k, l) in p.labels.iter().enumerate() {
        if !(l.size_pt.is_finite() && l.size_pt >= 2.0 && l.size_pt <= 200.0) {
            return Err(Error::invalid(
                format!("label {} ({:?})", k + 1, l.text),
                format!("font size must be 2…200 pt, got {}", l.size_pt),
            ));
        }
    }
    if let Some(lg) = &p.legend {
        for (k, e) in lg.entries.iter().enumerate() {
            match &e.swatch {
                Swatch::Line(s) => check_line(s, format!("legend entry {}", k + 1))?,
                Swatch::Marker(m) => check_marker(m, format!("legend entry {}", k + 1))?,
            }
        }
    }
    Ok(())
}

/// Push a text item whose anchor point is a fraction `align` (0 start, 0.5 centre, 1 end) along
/// the text's advance.
fn push_text(items: &mut Vec<Item>, block: TextBlock, x: f64, y: f64, align: f64, vertical: bool) {
    let shift = block.width * align;
    let (x, y) = if vertical {
        (x, y + shift)
    } else {
        (x - shift, y)
    };
    items.push(Item::Text {
        block,
        x,
        y,
        vertical,
        color: BLACK,
    });
}

/// The paths of one marker centred at (cx, cy) pt.
pub fn marker_items(m: &MarkerStyle, cx: f64, cy: f64, clip: Option<Rect>) -> Vec<Item> {
    let r = m.size_pt / 2.0;
    let edge = Some(Stroke {
        color: m.edge,
        width: 0.5,
        dash: Vec::new(),
    });
    let poly = |pts: Vec<(f64, f64)>| Item::Path {
        points: pts,
        closed: true,
        fill: Some(m.fill),
        stroke: edge.clone(),
        clip,
    };
    match m.shape {
        MarkerShape::Circle => vec![poly(
            (0..24)
                .map(|i| {
                    let a = i as f64 / 24.0 * std::f64::consts::TAU;
                    (cx + r * a.cos(), cy + r * a.sin())
                })
                .collect(),
        )],
        MarkerShape::Square => {
            let s = r * 0.85;
            vec![poly(vec![
                (cx - s, cy - s),
                (cx + s, cy - s),
                (cx + s, cy + s),
                (cx - s, cy + s),
            ])]
        }
        MarkerShape::Triangle => vec![poly(vec![
            (cx, cy - r),
            (cx + r * 0.866, cy + r * 0.5),
            (cx - r * 0.866, cy + r * 0.5),
        ])],
        MarkerShape::Diamond => vec![poly(vec![
            (cx, cy - r),
            (cx + r * 0.75, cy),
            (cx, cy + r),
            (cx - r * 0.75, cy),
        ])],
        MarkerShape::Cross => {
            let s = r * 0.8;
            let st = Stroke {
                color: m.fill,
                width: (m.size_pt * 0.18).max(0.6),
                dash: Vec::new(),
            };
            vec![
                line_item(vec![(cx - s, cy - s), (cx + s, cy + s)], st.clone(), clip),
                line_item(vec![(cx - s, cy + s), (cx + s, cy - s)], st, clip),
            ]
        }
    }
}

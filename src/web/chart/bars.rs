//! Horizontal range bars (the portfolio's NPV bars, the tornado) and vertical columns (the Monte
//! Carlo histogram).

use super::labels::{FONT, Placer, Rect, fit_text, text_box, text_width};
use super::{Frame, Marker, Tick, money_ticks, nice_ticks, padded, spaced};

const WIDTH: f64 = 760.0;
/// At most this share of the width goes to the labels left of the bars; longer ones are cut
/// (the whole label is their title).
const LABEL_SHARE: f64 = 0.3;
/// The plot keeps at least this width; a note that does not fit right of its bar then goes
/// left of it, or is left out (the table has it).
const MIN_PLOT: f64 = 260.0;
const ROW: f64 = 24.0;
const TOP: f64 = 20.0;
const AXIS: f64 = 26.0;

/// One bar to draw, in data units.
pub struct RangeInput {
    /// Text left of the bar.
    pub label: String,
    /// Bar start value.
    pub from: f64,
    /// Bar end value.
    pub to: f64,
    /// A thin line across the bar (e.g. the 10th to the 90th percentile).
    pub whisker: Option<(f64, f64)>,
    /// Where the bar changes to its second class (a tornado's base NPV); `None` for one class.
    pub split: Option<(f64, &'static str)>,
    /// CSS class of the bar (of its first part when split).
    pub class: &'static str,
    /// Text right of the bar.
    pub note: String,
}

/// One bar, in SVG units.
pub struct RangeRow {
    /// Text left of the bar (cut to fit, with an ellipsis).
    pub label: String,
    /// The whole label when it was cut, else empty.
    pub title: String,
    /// Text after the bar.
    pub note: String,
    /// CSS class.
    pub class: &'static str,
    /// Bar left x and width.
    pub x: f64,
    /// Width.
    pub w: f64,
    /// Top y.
    pub y: f64,
    /// Bar height.
    pub h: f64,
    /// Whisker from and to x.
    pub whisker: Option<(f64, f64)>,
    /// The second part of a split bar: x, width and class.
    pub second: Option<(f64, f64, &'static str)>,
    /// Baseline y for the texts.
    pub text_y: f64,
    /// X where the note starts; the note is left out when it fits on neither side.
    pub note_x: f64,
}

/// Horizontal bars on one money axis, with a vertical reference line.
pub struct RangeBars {
    /// The SVG box and the plot area.
    pub frame: Frame,
    /// Bars.
    pub rows: Vec<RangeRow>,
    /// The reference line and its text (centred on `text_x`).
    pub reference: Marker,
    /// Money ticks along the bottom.
    pub x_ticks: Vec<Tick>,
    /// Text summary.
    pub summary: String,
}

impl RangeBars {
    /// Lay out `bars` with a reference line at `reference` (zero for NPV bars, the case's NPV for
    /// a tornado).
    pub fn new(bars: Vec<RangeInput>, reference: f64, reference_label: &str, summary: String) -> Self {
        let values = bars
            .iter()
            .flat_map(|b| {
                let (wl, wh) = b.whisker.unwrap_or((b.from, b.to));
                [b.from, b.to, wl, wh]
            })
            .chain([reference]);
        let (lo, hi) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| (lo.min(v), hi.max(v)));
        let (lo, hi) = padded(lo, hi);
        // The labels' room is the longest label's width, up to a share of the chart.
        let label_space = bars.iter().map(|b| text_width(&b.label, FONT)).fold(0.0, f64::max).min(WIDTH * LABEL_SHARE);
        let left = (label_space + 12.0).ceil();
        // The plot ends where the widest note still fits after its bar (notes are written 6
        // units after the bar's or whisker's end, and the chart keeps 2 units at its edge).
        let end = |b: &RangeInput| b.from.max(b.to).max(b.whisker.map_or(f64::NEG_INFINITY, |w| w.1));
        let span = bars
            .iter()
            .filter(|b| !b.note.is_empty())
            .map(|b| ((end(b) - lo) / (hi - lo), text_width(&b.note, FONT)))
            .filter(|(f, _)| *f > 0.0)
            .map(|(f, w)| (WIDTH - 8.0 - w - left) / f)
            .fold(WIDTH - 10.0 - left, f64::min)
            .max(MIN_PLOT);
        let right = left + span;
        let x = |v: f64| left + (right - left) * (v - lo) / (hi - lo);
        let bottom = TOP + ROW * bars.len().max(1) as f64;
        let height = bottom + AXIS;
        let mut placer = Placer::new(Rect { x: 0.0, y: 0.0, w: WIDTH, h: height });
        let ref_w = text_width(reference_label, FONT);
        let ref_x = x(reference).clamp(ref_w / 2.0 + 1.0, WIDTH - ref_w / 2.0 - 1.0);
        placer.block(text_box(reference_label, FONT, ref_x - ref_w / 2.0, TOP - 6.0));
        let mut rows: Vec<RangeRow> = bars
            .into_iter()
            .enumerate()
            .map(|(i, b)| {
                let (a, c) = (x(b.from.min(b.to)), x(b.from.max(b.to)));
                let y = TOP + ROW * i as f64 + 4.0;
                // A split bar: the first class up to the split, the second beyond it.
                let (w, second) = match b.split {
                    Some((s, class)) => {
                        let m = x(s).clamp(a, c);
                        ((m - a).max(0.5), Some((m, (c - m).max(0.5), class)))
                    }
                    None => ((c - a).max(1.0), None),
                };
                let label = fit_text(&b.label, FONT, label_space);
                let title = if label == b.label { String::new() } else { b.label.clone() };
                let text_y = y + (ROW - 8.0) / 2.0 + 4.0;
                placer.block(text_box(&label, FONT, left - 8.0 - text_width(&label, FONT), text_y));
                RangeRow {
                    label,
                    title,
                    // The note's side is chosen below, once every label is blocked.
                    note_x: c.max(b.whisker.map_or(c, |(_, h)| x(h))) + 6.0,
                    note: b.note,
                    class: b.class,
                    x: a,
                    w,
                    second,
                    y,
                    h: ROW - 8.0,
                    whisker: b.whisker.map(|(l, h)| (x(l), x(h))),
                    text_y,
                }
            })
            .collect();
        for r in rows.iter_mut().filter(|r| !r.note.is_empty()) {
            let w = text_width(&r.note, FONT);
            let start = r.x.min(r.whisker.map_or(r.x, |(l, _)| l));
            let sides = [r.note_x, start - 6.0 - w].map(|nx| text_box(&r.note, FONT, nx, r.text_y));
            match placer.place(sides) {
                Some((_, b)) => r.note_x = b.x,
                None => r.note.clear(),
            }
        }
        let x_ticks = money_ticks(lo, hi)
            .into_iter()
            .map(|(v, label, title)| Tick { at: x(v), label, title })
            .filter(|t| t.at >= left - 1.0)
            .collect();
        Self {
            frame: Frame { width: WIDTH, height, left, right, top: TOP, bottom },
            rows,
            reference: Marker { at: x(reference), label: reference_label.to_string(), text_x: ref_x },
            x_ticks: spaced(x_ticks, bottom + 16.0, WIDTH, &[]),
            summary,
        }
    }
}

/// One column.
pub struct Column {
    /// Left x.
    pub x: f64,
    /// Width.
    pub w: f64,
    /// Top y.
    pub y: f64,
    /// Height.
    pub h: f64,
    /// Whether the column lies below zero on the value axis (drawn as a loss).
    pub loss: bool,
}

/// Vertical columns over a money axis: a histogram.
pub struct Columns {
    /// The SVG box and the plot area.
    pub frame: Frame,
    /// Columns.
    pub columns: Vec<Column>,
    /// X of the zero line, when zero is in range.
    pub zero_x: Option<f64>,
    /// Money ticks along the bottom.
    pub x_ticks: Vec<Tick>,
    /// Count ticks up the side.
    pub y_ticks: Vec<Tick>,
    /// Text summary.
    pub summary: String,
}

impl Columns {
    /// A histogram of `(from, to, count)` bins.
    pub fn histogram(bins: &[(f64, f64, usize)], summary: String) -> Self {
        let (right, top, bottom) = (WIDTH - 20.0, 10.0, 190.0);
        let lo = bins.first().map_or(0.0, |b| b.0);
        let hi = bins.last().map_or(1.0, |b| b.1).max(lo + 1.0);
        let max = bins.iter().map(|b| b.2).max().unwrap_or(1).max(1) as f64;
        let counts: Vec<f64> = nice_ticks(0.0, max).into_iter().filter(|v| v.fract() == 0.0).collect();
        let count_labels: Vec<String> = counts.iter().map(|v| format!("{v:.0}")).collect();
        let left = super::left_for(count_labels.iter().map(String::as_str), 0.0).max(40.0);
        let x = |v: f64| left + (right - left) * (v - lo) / (hi - lo);
        let y = |c: f64| bottom - (bottom - top) * c / max;
        let y_ticks: Vec<Tick> =
            counts.into_iter().zip(count_labels).map(|(v, label)| Tick::plain(y(v), label)).collect();
        let columns = bins
            .iter()
            .map(|&(from, to, count)| Column {
                x: x(from) + 0.5,
                w: (x(to) - x(from) - 1.0).max(0.5),
                y: y(count as f64),
                h: bottom - y(count as f64),
                loss: to <= 0.0,
            })
            .collect();
        Self {
            frame: Frame { width: WIDTH, height: bottom + AXIS, left, right, top, bottom },
            columns,
            zero_x: (lo < 0.0 && hi > 0.0).then(|| x(0.0)),
            x_ticks: spaced(
                money_ticks(lo, hi).into_iter().map(|(v, label, title)| Tick { at: x(v), label, title }).collect(),
                bottom + 16.0,
                WIDTH,
                &super::y_label_boxes(&y_ticks, left),
            ),
            y_ticks,
            summary,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// Every text box the chart draws.
    fn text_boxes(c: &RangeBars) -> Vec<Rect> {
        let mut out: Vec<Rect> = c
            .x_ticks
            .iter()
            .map(|t| text_box(&t.label, FONT, t.at - text_width(&t.label, FONT) / 2.0, c.frame.bottom + 16.0))
            .collect();
        let rw = text_width(&c.reference.label, FONT);
        out.push(text_box(&c.reference.label, FONT, c.reference.text_x - rw / 2.0, c.frame.top - 6.0));
        for r in &c.rows {
            out.push(text_box(&r.label, FONT, c.frame.left - 8.0 - text_width(&r.label, FONT), r.text_y));
            if !r.note.is_empty() {
                out.push(text_box(&r.note, FONT, r.note_x, r.text_y));
            }
        }
        out
    }

    fn bar(label: &str, from: f64, to: f64, note: &str) -> RangeInput {
        RangeInput {
            label: label.into(),
            from,
            to,
            whisker: None,
            split: Some((0.0, "bar-high")),
            class: "bar-low",
            note: note.into(),
        }
    }

    /// A tornado with a label longer than its share and long notes: the label is cut with its
    /// whole text kept as the title, and every note fits inside the chart.
    #[test]
    fn a_long_tornado_fits() {
        let long = "Unplanned die-change stops on the second and third shifts of the press line";
        let c = RangeBars::new(
            vec![
                bar(long, -14_206_745_464_648.0, 14_206_745_464_648.0, "-14,206,745,464,648 to 14,206,745,464,648"),
                bar("Idle running", -1.0, 2.0, "-1.00 to 2.00"),
            ],
            0.0,
            "NPV at likely",
            String::new(),
        );
        assert_eq!(c.rows[0].title, long);
        assert!(c.rows[0].label.ends_with('…'));
        assert!(c.frame.left <= WIDTH * LABEL_SHARE + 12.0 + 1.0);
        let frame = Rect { x: 0.0, y: 0.0, w: c.frame.width, h: c.frame.height };
        let boxes = text_boxes(&c);
        for (i, a) in boxes.iter().enumerate() {
            assert!(a.inside(&frame), "{a:?}");
            assert!(boxes[i + 1..].iter().all(|b| !a.intersects(b)), "{a:?}");
        }
        assert!(c.rows.iter().all(|r| !r.note.is_empty()), "both notes are kept");
        // The axis speaks in compact units, with the exact figure as the title.
        assert!(c.x_ticks.iter().any(|t| t.label == "10.0 tn" && t.title == "10,000,000,000,000.00"));
    }

    proptest! {
        /// Random bars: no two texts meet and none leaves the chart.
        #[test]
        fn texts_never_overlap(rows in prop::collection::vec((-1e7..1e7_f64, -1e7..1e7_f64, "[a-z ]{1,50}", "[0-9,. to-]{0,40}"), 1..12), reference in -1e7..1e7_f64) {
            let bars = rows.iter().map(|(a, b, l, n)| bar(l, *a, *b, n)).collect();
            let c = RangeBars::new(bars, reference, "NPV at likely", String::new());
            let frame = Rect { x: 0.0, y: 0.0, w: c.frame.width, h: c.frame.height };
            let boxes = text_boxes(&c);
            for (i, a) in boxes.iter().enumerate() {
                prop_assert!(a.inside(&frame), "{a:?}");
                for b in &boxes[i + 1..] {
                    prop_assert!(!a.intersects(b), "{a:?} meets {b:?}");
                }
            }
        }
    }
}

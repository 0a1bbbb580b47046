//! Horizontal range bars (the portfolio's NPV bars, the tornado) and vertical columns (the Monte
//! Carlo histogram).

use super::{Frame, Tick, money_label, nice_ticks, padded};

const WIDTH: f64 = 760.0;
const LABEL_SPACE: f64 = 190.0;
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
    /// Text left of the bar.
    pub label: String,
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
    /// X of the note.
    pub note_x: f64,
}

/// Horizontal bars on one money axis, with a vertical reference line.
pub struct RangeBars {
    /// The SVG box and the plot area.
    pub frame: Frame,
    /// Bars.
    pub rows: Vec<RangeRow>,
    /// X of the reference line and its text.
    pub reference: Tick,
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
        // Room on the right for the note after the longest bar.
        let (left, right) = (LABEL_SPACE, WIDTH - 170.0);
        let x = |v: f64| left + (right - left) * (v - lo) / (hi - lo);
        let bottom = TOP + ROW * bars.len().max(1) as f64;
        let rows = bars
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
                RangeRow {
                    label: b.label,
                    note_x: c.max(b.whisker.map_or(c, |(_, h)| x(h))) + 6.0,
                    note: b.note,
                    class: b.class,
                    x: a,
                    w,
                    second,
                    y,
                    h: ROW - 8.0,
                    whisker: b.whisker.map(|(l, h)| (x(l), x(h))),
                    text_y: y + (ROW - 8.0) / 2.0 + 4.0,
                }
            })
            .collect();
        Self {
            frame: Frame { width: WIDTH, height: bottom + AXIS, left, right, top: TOP, bottom },
            rows,
            reference: Tick { at: x(reference), label: reference_label.to_string() },
            x_ticks: nice_ticks(lo, hi).into_iter().map(|v| Tick { at: x(v), label: money_label(v) }).collect(),
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
        let (left, right, top, bottom) = (70.0, WIDTH - 20.0, 10.0, 190.0);
        let lo = bins.first().map_or(0.0, |b| b.0);
        let hi = bins.last().map_or(1.0, |b| b.1).max(lo + 1.0);
        let max = bins.iter().map(|b| b.2).max().unwrap_or(1).max(1) as f64;
        let x = |v: f64| left + (right - left) * (v - lo) / (hi - lo);
        let y = |c: f64| bottom - (bottom - top) * c / max;
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
            x_ticks: nice_ticks(lo, hi).into_iter().map(|v| Tick { at: x(v), label: money_label(v) }).collect(),
            y_ticks: nice_ticks(0.0, max)
                .into_iter()
                .filter(|v| v.fract() == 0.0)
                .map(|v| Tick { at: y(v), label: format!("{v:.0}") })
                .collect(),
            summary,
        }
    }
}

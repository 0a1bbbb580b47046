//! Server-side SVG charts: coordinates are computed here, the markup lives in templates.

mod bars;
mod labels;
mod scatter;
mod timeline;

pub use bars::{Columns, RangeBars, RangeInput};
pub use scatter::{Axis, Scatter, ScatterPoint};
pub use timeline::{CountChart, Timeline, TimelineInput};

use crate::domain::{Money, NumberFormat};
use labels::{FONT, Placer, Rect, text_box, text_width};

/// Months to one decimal in the page's number format.
fn months(m: Decimal) -> String {
    NumberFormat::current().write(m, 1)
}
use rust_decimal::Decimal;
use rust_decimal::prelude::ToPrimitive;

/// Plot area size in SVG user units.
const WIDTH: f64 = 720.0;
const HEIGHT: f64 = 260.0;
/// Margin below the plot for the month labels.
const BOTTOM: f64 = 30.0;
const TOP: f64 = 12.0;

/// The SVG box and the plot area inside it, in SVG user units.
#[derive(Clone, Copy)]
pub struct Frame {
    /// Full SVG width.
    pub width: f64,
    /// Full SVG height.
    pub height: f64,
    /// Left edge of the plot.
    pub left: f64,
    /// Right edge of the plot.
    pub right: f64,
    /// Top edge of the plot.
    pub top: f64,
    /// Bottom edge of the plot.
    pub bottom: f64,
}

/// One axis tick: position and text.
pub struct Tick {
    /// Position along its axis.
    pub at: f64,
    /// Text shown (compact units for money: `350 k`).
    pub label: String,
    /// The exact figure, shown as the label's title; empty when the label is exact.
    pub title: String,
}

impl Tick {
    /// A tick whose label is exact.
    fn plain(at: f64, label: String) -> Self {
        Self { at, label, title: String::new() }
    }
}

/// Money tick values over `lo..=hi`: each value with its compact label and exact figure.
fn money_ticks(lo: f64, hi: f64) -> Vec<(f64, String, String)> {
    nice_ticks(lo, hi)
        .into_iter()
        .map(|v| {
            let d = Decimal::from_f64_retain(v).unwrap_or_default().round_dp(2);
            (v, NumberFormat::current().write_compact(d), Money(d).to_string())
        })
        .collect()
}

/// The left edge of a plot whose y-axis labels (right-aligned 6 units left of the plot) are
/// `labels`, with `before` units kept free on their left (an axis title): the longest label
/// decides, so none is cut.
fn left_for<'a>(labels: impl Iterator<Item = &'a str>, before: f64) -> f64 {
    let widest = labels.map(|l| text_width(l, FONT)).fold(0.0, f64::max);
    (before + widest + 6.0 + 4.0).ceil()
}

/// The boxes of y-axis labels drawn right-aligned 6 units left of `left`, 4 below their tick.
fn y_label_boxes(ticks: &[Tick], left: f64) -> Vec<Rect> {
    ticks.iter().map(|t| text_box(&t.label, FONT, left - 6.0 - text_width(&t.label, FONT), t.at + 4.0)).collect()
}

/// Ticks along the bottom with their labels centred at `baseline`: a tick whose label would
/// leave `0..width`, meet a `blocked` box (the y-axis labels) or meet the label of a tick kept
/// before it is dropped (first ones win).
fn spaced(ticks: Vec<Tick>, baseline: f64, width: f64, blocked: &[Rect]) -> Vec<Tick> {
    let mut placer = Placer::new(Rect { x: 0.0, y: baseline - 2.0 * FONT, w: width, h: 4.0 * FONT });
    for b in blocked {
        placer.block(*b);
    }
    ticks
        .into_iter()
        .filter(|t| {
            let w = text_width(&t.label, FONT);
            // A gap of 4 units between neighbours.
            let mut b = text_box(&t.label, FONT, t.at - w / 2.0 - 2.0, baseline);
            b.w += 4.0;
            placer.place([b]).is_some()
        })
        .collect()
}

/// A vertical marker's text: right of the line at `at`, or left of it when the right side would
/// leave the chart (`right` is the chart's right edge).
fn marker_text_x(label: &str, at: f64, right: f64) -> f64 {
    let w = text_width(label, FONT);
    if at + 4.0 + w <= right { at + 4.0 } else { (at - 4.0 - w).max(0.0) }
}

/// A vertical marker line and its text.
pub struct Marker {
    /// X of the line.
    pub at: f64,
    /// Text.
    pub label: String,
    /// X where the text starts.
    pub text_x: f64,
}

/// A line chart of one monthly series with a zero line and an optional vertical marker.
pub struct LineChart {
    /// The SVG box and the plot area.
    pub frame: Frame,
    /// `points` attribute of the polyline.
    pub points: String,
    /// Y of the zero line.
    pub zero_y: f64,
    /// Month ticks.
    pub x_ticks: Vec<Tick>,
    /// Money ticks.
    pub y_ticks: Vec<Tick>,
    /// The payback marker.
    pub marker: Option<Marker>,
    /// A text summary for screen readers and for people who do not read charts.
    pub summary: String,
}

impl LineChart {
    /// Chart `values` (one per month from 0); `marker_month` draws the payback line.
    pub fn cumulative(values: &[Decimal], marker_month: Option<Decimal>, what: &str) -> Self {
        let ys: Vec<f64> = values.iter().map(|v| v.to_f64().unwrap_or(0.0)).collect();
        let (mut lo, mut hi) = ys.iter().fold((0.0_f64, 0.0_f64), |(lo, hi), y| (lo.min(*y), hi.max(*y)));
        if (hi - lo).abs() < 1.0 {
            lo -= 1.0;
            hi += 1.0;
        }
        let right = WIDTH - 10.0;
        let bottom = HEIGHT - BOTTOM;
        let y_values = money_ticks(lo, hi);
        let left = left_for(y_values.iter().map(|t| t.1.as_str()), 0.0);
        let n = ys.len().max(2) - 1;
        let x = |i: f64| left + (right - left) * i / n as f64;
        let y = |v: f64| TOP + (bottom - TOP) * (hi - v) / (hi - lo);
        let points = ys
            .iter()
            .enumerate()
            .map(|(i, v)| format!("{:.1},{:.1}", x(i as f64), y(*v)))
            .collect::<Vec<_>>()
            .join(" ");
        // About six month ticks on whole years where the horizon allows.
        let step = if n >= 36 {
            12
        } else if n >= 12 {
            6
        } else {
            1
        };
        let y_ticks: Vec<Tick> =
            y_values.into_iter().map(|(v, label, title)| Tick { at: y(v), label, title }).collect();
        let x_ticks = spaced(
            (0..=n).step_by(step).map(|m| Tick::plain(x(m as f64), format!("{m}"))).collect(),
            bottom + 18.0,
            WIDTH,
            &y_label_boxes(&y_ticks, left),
        );
        let marker = marker_month.and_then(|m| Some((m.to_f64()?, m))).map(|(at, m)| {
            let label = format!("payback {} months", months(m));
            Marker { at: x(at), text_x: marker_text_x(&label, x(at), WIDTH), label }
        });
        let last = values.last().copied().unwrap_or_default();
        let summary = match marker_month {
            Some(m) => format!("{what} crosses zero after {} months and ends at {}.", months(m), Money(last)),
            None => format!("{what} never crosses zero inside the horizon; it ends at {}.", Money(last)),
        };
        Self {
            frame: Frame { width: WIDTH, height: HEIGHT, left, right, top: TOP, bottom },
            points,
            zero_y: y(0.0),
            x_ticks,
            y_ticks,
            marker,
            summary,
        }
    }
}

/// `lo..hi` widened to include zero-width ranges and padded by 4 % on each side.
fn padded(lo: f64, hi: f64) -> (f64, f64) {
    let (lo, hi) = if (hi - lo).abs() < 1.0 { (lo - 1.0, hi + 1.0) } else { (lo, hi) };
    let pad = (hi - lo) * 0.04;
    (lo - pad, hi + pad)
}

/// Round tick values (1, 2 or 5 times a power of ten) covering `lo..=hi`.
fn nice_ticks(lo: f64, hi: f64) -> Vec<f64> {
    let raw = (hi - lo) / 5.0;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0].into_iter().map(|m| m * mag).find(|s| *s >= raw).unwrap_or(mag * 10.0);
    let mut v = (lo / step).ceil() * step;
    let mut out = Vec::new();
    while v <= hi + step * 1e-9 && out.len() < 12 {
        out.push(v);
        v += step;
    }
    out
}

/// A range bar small enough for a table cell: the 10th to the 90th percentile as a bar with the
/// median as a tick, on a scale the whole column shares (so the rows compare at a glance).
pub struct RangeCell {
    /// X of the 10th percentile.
    pub x10: f64,
    /// X of the median.
    pub x50: f64,
    /// Width of the bar (10th to 90th percentile).
    pub w: f64,
    /// X of zero, when the column's scale includes it.
    pub zero: Option<f64>,
}

impl RangeCell {
    /// Width of the cell's SVG (`templates/portfolio/_figures.html` draws it this wide).
    pub const WIDTH: f64 = 110.0;

    /// The scale of a column of `(p10, p90)` ranges: from the lowest to the highest, with zero.
    pub fn scale(ranges: impl Iterator<Item = (f64, f64)>) -> (f64, f64) {
        let (lo, hi) = ranges.fold((0.0_f64, 0.0_f64), |(lo, hi), (a, b)| (lo.min(a), hi.max(b)));
        if hi - lo < 1.0 { (lo - 1.0, hi + 1.0) } else { (lo, hi) }
    }

    /// Lay out one row's percentiles on the column's `scale` (2 units kept at each end).
    pub fn new(p10: f64, p50: f64, p90: f64, (lo, hi): (f64, f64)) -> Self {
        let x = |v: f64| 2.0 + (Self::WIDTH - 4.0) * ((v - lo) / (hi - lo)).clamp(0.0, 1.0);
        Self { x10: x(p10), x50: x(p50), w: (x(p90) - x(p10)).max(1.0), zero: (lo < 0.0 && hi > 0.0).then(|| x(0.0)) }
    }
}

/// Expected against measured: two lines (cumulative) or paired bars (per month), on one scale.
pub struct PairChart {
    /// The SVG box and the plot area.
    pub frame: Frame,
    /// Y of the zero line.
    pub zero_y: f64,
    /// Polyline of the expected series (line charts).
    pub expected_points: String,
    /// Polyline of the measured series (line charts), up to the elapsed month.
    pub measured_points: String,
    /// Bars: x, width, y, height of expected then measured (bar charts).
    pub bars: Vec<Bar>,
    /// Money ticks.
    pub y_ticks: Vec<Tick>,
    /// Month ticks.
    pub x_ticks: Vec<Tick>,
    /// Text summary.
    pub summary: String,
}

/// One bar.
pub struct Bar {
    /// Left x.
    pub x: f64,
    /// Width.
    pub w: f64,
    /// Top y.
    pub y: f64,
    /// Height.
    pub h: f64,
    /// Whether it is the measured bar (drawn solid) or the expected one (drawn hatched).
    pub measured: bool,
}

impl PairChart {
    /// The y scale over `values` and zero: the money ticks, the left edge their labels need,
    /// the bottom and right edges, and the value-to-y function.
    fn y_scale(
        values: impl Iterator<Item = f64>,
        height: f64,
    ) -> (Vec<Tick>, f64, f64, f64, impl Fn(f64) -> f64 + Copy) {
        let (mut lo, mut hi) = values.fold((0.0_f64, 0.0_f64), |(lo, hi), v| (lo.min(v), hi.max(v)));
        if (hi - lo).abs() < 1.0 {
            lo -= 1.0;
            hi += 1.0;
        }
        let bottom = height - BOTTOM;
        let y = move |v: f64| TOP + (bottom - TOP) * (hi - v) / (hi - lo);
        let values = money_ticks(lo, hi);
        let left = left_for(values.iter().map(|t| t.1.as_str()), 0.0);
        let ticks = values.into_iter().map(|(v, label, title)| Tick { at: y(v), label, title }).collect();
        (ticks, left, bottom, WIDTH - 10.0, y)
    }

    /// Cumulative expected and measured lines; the measured line stops at `elapsed`.
    pub fn cumulative(expected: &[Decimal], measured: &[Decimal], elapsed: usize) -> Self {
        let cum = |v: &[Decimal], upto: usize| -> Vec<f64> {
            v.iter()
                .take(upto)
                .scan(Decimal::ZERO, |acc, x| {
                    *acc += *x;
                    Some(acc.to_f64().unwrap_or(0.0))
                })
                .collect()
        };
        let (e, m) = (cum(expected, expected.len()), cum(measured, elapsed));
        let n = expected.len().max(2) - 1;
        let (y_ticks, left, bottom, right, y) = Self::y_scale(e.iter().chain(m.iter()).copied(), HEIGHT);
        let x = |i: usize| left + (right - left) * i as f64 / n as f64;
        let line = |v: &[f64]| {
            v.iter().enumerate().map(|(i, v)| format!("{:.1},{:.1}", x(i), y(*v))).collect::<Vec<_>>().join(" ")
        };
        let step = if n >= 36 {
            12
        } else if n >= 12 {
            6
        } else {
            1
        };
        let summary = format!(
            "Cumulative net cash flow: booked {} after {elapsed} months against {} expected by then.",
            Money(measured.iter().take(elapsed).sum()),
            Money(expected.iter().take(elapsed).sum())
        );
        Self {
            frame: Frame { width: WIDTH, height: HEIGHT, left, right, top: TOP, bottom },
            zero_y: y(0.0),
            expected_points: line(&e),
            measured_points: line(&m),
            bars: Vec::new(),
            x_ticks: spaced(
                (0..=n).step_by(step).map(|i| Tick::plain(x(i), i.to_string())).collect(),
                bottom + 18.0,
                WIDTH,
                &y_label_boxes(&y_ticks, left),
            ),
            y_ticks,
            summary,
        }
    }

    /// Paired monthly bars of expected and measured money for the first `months` months.
    pub fn monthly(expected: &[Decimal], measured: &[Decimal], months: usize, what: &str) -> Self {
        let months = months.clamp(1, expected.len().max(1));
        let f = |v: &[Decimal], i: usize| v.get(i).and_then(|d| d.to_f64()).unwrap_or(0.0);
        let height = 170.0;
        let (y_ticks, left, bottom, right, y) =
            Self::y_scale((0..months).flat_map(|i| [f(expected, i), f(measured, i)]), height);
        let slot = (right - left) / months as f64;
        let w = (slot * 0.4).min(14.0);
        let mut bars = Vec::with_capacity(months * 2);
        for i in 0..months {
            for (k, v) in [f(expected, i), f(measured, i)].into_iter().enumerate() {
                let (top, base) = (y(v.max(0.0)), y(v.min(0.0)));
                bars.push(Bar {
                    x: left + slot * i as f64 + slot * 0.1 + w * k as f64,
                    w,
                    y: top,
                    h: (base - top).max(0.5),
                    measured: k == 1,
                });
            }
        }
        let step = if months > 24 {
            6
        } else if months > 8 {
            3
        } else {
            1
        };
        let summary = format!(
            "{what}: measured {} against {} expected over {months} months.",
            Money(measured.iter().take(months).sum()),
            Money(expected.iter().take(months).sum())
        );
        Self {
            frame: Frame { width: WIDTH, height, left, right, top: TOP, bottom },
            zero_y: y(0.0),
            expected_points: String::new(),
            measured_points: String::new(),
            bars,
            x_ticks: spaced(
                (0..months).step_by(step).map(|i| Tick::plain(left + slot * (i as f64 + 0.5), i.to_string())).collect(),
                bottom + 18.0,
                WIDTH,
                &y_label_boxes(&y_ticks, left),
            ),
            y_ticks,
            summary,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_are_round() {
        assert_eq!(nice_ticks(-1000.0, 4000.0), vec![-1000.0, 0.0, 1000.0, 2000.0, 3000.0, 4000.0]);
    }
}

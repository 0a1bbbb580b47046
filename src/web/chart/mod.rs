//! Server-side SVG charts: coordinates are computed here, the markup lives in templates.

mod bars;
mod scatter;

pub use bars::{Columns, RangeBars, RangeInput};
pub use scatter::{Axis, Scatter, ScatterPoint};

use crate::domain::{Money, NumberFormat};

/// Months to one decimal in the page's number format.
fn months(m: Decimal) -> String {
    NumberFormat::current().write(m, 1)
}
use rust_decimal::Decimal;
use rust_decimal::prelude::ToPrimitive;

/// Plot area size in SVG user units.
const WIDTH: f64 = 720.0;
const HEIGHT: f64 = 260.0;
/// Margins for the axis labels.
const LEFT: f64 = 90.0;
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
    /// Text shown.
    pub label: String,
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
    /// X of the payback marker and its text.
    pub marker: Option<Tick>,
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
        let n = ys.len().max(2) - 1;
        let x = |i: f64| LEFT + (right - LEFT) * i / n as f64;
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
        let x_ticks = (0..=n).step_by(step).map(|m| Tick { at: x(m as f64), label: format!("{m}") }).collect();
        let y_ticks = nice_ticks(lo, hi)
            .into_iter()
            .map(|v| Tick { at: y(v), label: Money(Decimal::from_f64_retain(v).unwrap_or_default()).to_string() })
            .collect();
        let marker = marker_month
            .and_then(|m| Some((m.to_f64()?, m)))
            .map(|(at, m)| Tick { at: x(at), label: format!("payback {} months", months(m)) });
        let last = values.last().copied().unwrap_or_default();
        let summary = match marker_month {
            Some(m) => format!("{what} crosses zero after {} months and ends at {}.", months(m), Money(last)),
            None => format!("{what} never crosses zero inside the horizon; it ends at {}.", Money(last)),
        };
        Self {
            frame: Frame { width: WIDTH, height: HEIGHT, left: LEFT, right, top: TOP, bottom },
            points,
            zero_y: y(0.0),
            x_ticks,
            y_ticks,
            marker,
            summary,
        }
    }
}

/// A money tick label.
fn money_label(v: f64) -> String {
    Money(Decimal::from_f64_retain(v).unwrap_or_default().round()).to_string()
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
    fn y_scale(values: impl Iterator<Item = f64>, height: f64) -> (f64, f64, f64, f64, impl Fn(f64) -> f64 + Copy) {
        let (mut lo, mut hi) = values.fold((0.0_f64, 0.0_f64), |(lo, hi), v| (lo.min(v), hi.max(v)));
        if (hi - lo).abs() < 1.0 {
            lo -= 1.0;
            hi += 1.0;
        }
        let bottom = height - BOTTOM;
        let y = move |v: f64| TOP + (bottom - TOP) * (hi - v) / (hi - lo);
        (lo, hi, bottom, WIDTH - 10.0, y)
    }

    fn ticks(lo: f64, hi: f64, y: impl Fn(f64) -> f64) -> Vec<Tick> {
        nice_ticks(lo, hi)
            .into_iter()
            .map(|v| Tick { at: y(v), label: Money(Decimal::from_f64_retain(v).unwrap_or_default()).to_string() })
            .collect()
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
        let (lo, hi, bottom, right, y) = Self::y_scale(e.iter().chain(m.iter()).copied(), HEIGHT);
        let x = |i: usize| LEFT + (right - LEFT) * i as f64 / n as f64;
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
            frame: Frame { width: WIDTH, height: HEIGHT, left: LEFT, right, top: TOP, bottom },
            zero_y: y(0.0),
            expected_points: line(&e),
            measured_points: line(&m),
            bars: Vec::new(),
            y_ticks: Self::ticks(lo, hi, y),
            x_ticks: (0..=n).step_by(step).map(|i| Tick { at: x(i), label: i.to_string() }).collect(),
            summary,
        }
    }

    /// Paired monthly bars of expected and measured money for the first `months` months.
    pub fn monthly(expected: &[Decimal], measured: &[Decimal], months: usize, what: &str) -> Self {
        let months = months.clamp(1, expected.len().max(1));
        let f = |v: &[Decimal], i: usize| v.get(i).and_then(|d| d.to_f64()).unwrap_or(0.0);
        let height = 170.0;
        let (lo, hi, bottom, right, y) =
            Self::y_scale((0..months).flat_map(|i| [f(expected, i), f(measured, i)]), height);
        let slot = (right - LEFT) / months as f64;
        let w = (slot * 0.4).min(14.0);
        let mut bars = Vec::with_capacity(months * 2);
        for i in 0..months {
            for (k, v) in [f(expected, i), f(measured, i)].into_iter().enumerate() {
                let (top, base) = (y(v.max(0.0)), y(v.min(0.0)));
                bars.push(Bar {
                    x: LEFT + slot * i as f64 + slot * 0.1 + w * k as f64,
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
            frame: Frame { width: WIDTH, height, left: LEFT, right, top: TOP, bottom },
            zero_y: y(0.0),
            expected_points: String::new(),
            measured_points: String::new(),
            bars,
            y_ticks: Self::ticks(lo, hi, y),
            x_ticks: (0..months)
                .step_by(step)
                .map(|i| Tick { at: LEFT + slot * (i as f64 + 0.5), label: i.to_string() })
                .collect(),
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

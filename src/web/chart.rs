//! Server-side SVG charts: coordinates are computed here, the markup lives in templates.

use crate::domain::Money;
use rust_decimal::Decimal;
use rust_decimal::prelude::ToPrimitive;

/// Plot area size in SVG user units.
const WIDTH: f64 = 720.0;
const HEIGHT: f64 = 260.0;
/// Margins for the axis labels.
const LEFT: f64 = 90.0;
const BOTTOM: f64 = 30.0;
const TOP: f64 = 12.0;

/// One axis tick: position and text.
pub struct Tick {
    /// Position along its axis.
    pub at: f64,
    /// Text shown.
    pub label: String,
}

/// A line chart of one monthly series with a zero line and an optional vertical marker.
pub struct LineChart {
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
        let marker =
            marker_month.and_then(|m| m.to_f64()).map(|m| Tick { at: x(m), label: format!("payback {m:.1} months") });
        let last = values.last().copied().unwrap_or_default();
        let summary = match marker_month {
            Some(m) => format!(
                "{what} crosses zero after {:.1} months and ends at {}.",
                m.to_f64().unwrap_or(0.0),
                Money(last)
            ),
            None => format!("{what} never crosses zero inside the horizon; it ends at {}.", Money(last)),
        };
        Self {
            width: WIDTH,
            height: HEIGHT,
            left: LEFT,
            right,
            top: TOP,
            bottom,
            points,
            zero_y: y(0.0),
            x_ticks,
            y_ticks,
            marker,
            summary,
        }
    }
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_are_round() {
        assert_eq!(nice_ticks(-1000.0, 4000.0), vec![-1000.0, 0.0, 1000.0, 2000.0, 3000.0, 4000.0]);
    }
}

//! Labelled points on two axes: investment against NPV, readiness against NPV.

use super::{Frame, Tick, money_label, nice_ticks, padded};

const WIDTH: f64 = 560.0;
const HEIGHT: f64 = 300.0;

/// How an axis is labelled.
#[derive(Clone, Copy)]
pub enum Axis {
    /// Money, from the data.
    Money,
    /// A fixed score range (readiness 1 to 5).
    Score(f64, f64),
}

/// One point to draw, in data units.
pub struct ScatterPoint {
    /// X value.
    pub x: f64,
    /// Y value.
    pub y: f64,
    /// Text beside the point.
    pub label: String,
    /// CSS class (the point's standing).
    pub class: &'static str,
}

/// One point, in SVG units.
pub struct Placed {
    /// X.
    pub x: f64,
    /// Y.
    pub y: f64,
    /// Text.
    pub label: String,
    /// CSS class.
    pub class: &'static str,
}

/// A scatter chart.
pub struct Scatter {
    /// The SVG box and the plot area.
    pub frame: Frame,
    /// Points.
    pub points: Vec<Placed>,
    /// Y of the zero line, when zero is in range.
    pub zero_y: Option<f64>,
    /// Ticks along the bottom.
    pub x_ticks: Vec<Tick>,
    /// Ticks up the side.
    pub y_ticks: Vec<Tick>,
    /// Axis titles.
    pub x_title: String,
    /// Y axis title.
    pub y_title: String,
    /// Text summary.
    pub summary: String,
}

fn range(values: impl Iterator<Item = f64>, axis: Axis) -> (f64, f64) {
    match axis {
        Axis::Score(lo, hi) => (lo - 0.2, hi + 0.2),
        Axis::Money => {
            let (lo, hi) = values.fold((0.0_f64, 0.0_f64), |(lo, hi), v| (lo.min(v), hi.max(v)));
            padded(lo, hi)
        }
    }
}

fn ticks(lo: f64, hi: f64, axis: Axis, at: impl Fn(f64) -> f64) -> Vec<Tick> {
    match axis {
        Axis::Score(a, b) => {
            (a as i32..=b as i32).map(|v| Tick { at: at(f64::from(v)), label: v.to_string() }).collect()
        }
        Axis::Money => nice_ticks(lo, hi).into_iter().map(|v| Tick { at: at(v), label: money_label(v) }).collect(),
    }
}

impl Scatter {
    /// Lay out `points`; the y axis is money.
    pub fn new(points: Vec<ScatterPoint>, x_axis: Axis, x_title: &str, y_title: &str, summary: String) -> Self {
        // Room on the right for the label of the rightmost point.
        let (left, right, top, bottom) = (90.0, WIDTH - 70.0, 10.0, HEIGHT - 40.0);
        let (xl, xh) = range(points.iter().map(|p| p.x), x_axis);
        let (yl, yh) = range(points.iter().map(|p| p.y), Axis::Money);
        let x = |v: f64| left + (right - left) * (v - xl) / (xh - xl);
        let y = |v: f64| bottom - (bottom - top) * (v - yl) / (yh - yl);
        Self {
            frame: Frame { width: WIDTH, height: HEIGHT, left, right, top, bottom },
            points: points
                .into_iter()
                .map(|p| Placed { x: x(p.x), y: y(p.y), label: p.label, class: p.class })
                .collect(),
            zero_y: (yl < 0.0 && yh > 0.0).then(|| y(0.0)),
            x_ticks: ticks(xl, xh, x_axis, x),
            y_ticks: ticks(yl, yh, Axis::Money, y),
            x_title: x_title.to_string(),
            y_title: y_title.to_string(),
            summary,
        }
    }
}

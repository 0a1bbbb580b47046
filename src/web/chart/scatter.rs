//! Labelled points on two axes: investment against NPV, readiness against NPV.

use super::labels::{FONT, Placer, Rect, around_point, text_box, text_width};
use super::{Frame, Tick, money_ticks, padded, spaced};

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
    /// Where the label's text starts and its baseline; `None` when it found no free place.
    pub text: Option<(f64, f64)>,
    /// CSS class.
    pub class: &'static str,
}

/// Radius of a point (the template draws `r="6"`).
const RADIUS: f64 = 6.0;

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
    /// Labels of points left unlabelled for lack of room, in the order given.
    pub unlabelled: Vec<String>,
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

/// Tick values with their labels and exact figures.
fn ticks(lo: f64, hi: f64, axis: Axis) -> Vec<(f64, String, String)> {
    match axis {
        Axis::Score(a, b) => (a as i32..=b as i32).map(|v| (f64::from(v), v.to_string(), String::new())).collect(),
        Axis::Money => money_ticks(lo, hi),
    }
}

/// Room kept left of the y-axis labels for the rotated y-axis title.
const TITLE_ROOM: f64 = 26.0;

impl Scatter {
    /// Lay out `points`; the y axis is money.
    pub fn new(points: Vec<ScatterPoint>, x_axis: Axis, x_title: &str, y_title: &str, summary: String) -> Self {
        // Room on the right for the label of the rightmost point.
        let (right, top, bottom) = (WIDTH - 70.0, 10.0, HEIGHT - 40.0);
        let (xl, xh) = range(points.iter().map(|p| p.x), x_axis);
        let (yl, yh) = range(points.iter().map(|p| p.y), Axis::Money);
        let y_values = ticks(yl, yh, Axis::Money);
        let left = super::left_for(y_values.iter().map(|t| t.1.as_str()), TITLE_ROOM);
        let x = |v: f64| left + (right - left) * (v - xl) / (xh - xl);
        let y = |v: f64| bottom - (bottom - top) * (v - yl) / (yh - yl);
        let y_ticks: Vec<Tick> =
            y_values.into_iter().map(|(v, label, title)| Tick { at: y(v), label, title }).collect();
        let y_boxes = super::y_label_boxes(&y_ticks, left);
        let x_ticks = spaced(
            ticks(xl, xh, x_axis).into_iter().map(|(v, label, title)| Tick { at: x(v), label, title }).collect(),
            bottom + 16.0,
            WIDTH,
            &y_boxes,
        );
        // Every other text of the chart and every point is blocked before the labels are placed.
        let mut placer = Placer::new(Rect { x: 0.0, y: 0.0, w: WIDTH, h: HEIGHT });
        for b in y_boxes {
            placer.block(b);
        }
        for t in &x_ticks {
            placer.block(text_box(&t.label, FONT, t.at - text_width(&t.label, FONT) / 2.0, bottom + 16.0));
        }
        let x_title_w = text_width(x_title, FONT);
        placer.block(text_box(x_title, FONT, (left + right) / 2.0 - x_title_w / 2.0, HEIGHT - 4.0));
        // The y title is turned a quarter to the right about (12, top + 4): it runs down from there.
        placer.block(Rect { x: 12.0 - 0.25 * FONT, y: top + 4.0, w: 1.2 * FONT, h: text_width(y_title, FONT) });
        let mut placed: Vec<Placed> = points
            .into_iter()
            .map(|p| Placed { x: x(p.x), y: y(p.y), label: p.label, text: None, class: p.class })
            .collect();
        for p in &placed {
            placer.block(Rect { x: p.x - RADIUS, y: p.y - RADIUS, w: 2.0 * RADIUS, h: 2.0 * RADIUS });
        }
        let mut unlabelled = Vec::new();
        for p in &mut placed {
            let (w, h) = (text_width(&p.label, FONT), 1.2 * FONT);
            match placer.place(around_point(p.x, p.y, RADIUS, w, h)) {
                // The text's baseline sits 0.95 of the size below the box's top.
                Some((_, b)) => p.text = Some((b.x, b.y + 0.95 * FONT)),
                None => unlabelled.push(p.label.clone()),
            }
        }
        Self {
            frame: Frame { width: WIDTH, height: HEIGHT, left, right, top, bottom },
            points: placed,
            zero_y: (yl < 0.0 && yh > 0.0).then(|| y(0.0)),
            x_ticks,
            y_ticks,
            x_title: x_title.to_string(),
            y_title: y_title.to_string(),
            summary,
            unlabelled,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// Every text box the chart draws: tick labels and the points' labels.
    fn text_boxes(c: &Scatter) -> Vec<Rect> {
        let ticks_y = c
            .y_ticks
            .iter()
            .map(|t| text_box(&t.label, FONT, c.frame.left - 6.0 - text_width(&t.label, FONT), t.at + 4.0));
        let ticks_x = c
            .x_ticks
            .iter()
            .map(|t| text_box(&t.label, FONT, t.at - text_width(&t.label, FONT) / 2.0, c.frame.bottom + 16.0));
        let labels = c.points.iter().filter_map(|p| p.text.map(|(x, y)| text_box(&p.label, FONT, x, y)));
        ticks_y.chain(ticks_x).chain(labels).collect()
    }

    fn chart(points: &[(f64, f64, String)]) -> Scatter {
        let points = points
            .iter()
            .map(|(x, y, label)| ScatterPoint { x: *x, y: *y, label: label.clone(), class: "dot-other" })
            .collect();
        Scatter::new(points, Axis::Money, "one-off investment (EUR)", "NPV (EUR)", String::new())
    }

    /// The demo plant's two close pairs (investment, NPV as on its portfolio page): both points
    /// of each pair keep a label, on different sides, and the y labels fit left of the plot.
    #[test]
    fn close_points_are_both_labelled_apart() {
        let c = chart(&[
            (80_700.0, 68_954.53, "PRESS-2".into()),
            (89_500.0, 67_007.87, "ASSY-3".into()),
            (31_000.0, 18_529.08, "EOL-1".into()),
            (32_000.0, 12_123.01, "HEAT-1".into()),
            (99_000.0, -76_996.13, "MOULD-2".into()),
        ]);
        assert!(c.unlabelled.is_empty(), "{:?}", c.unlabelled);
        let boxes = text_boxes(&c);
        for (i, a) in boxes.iter().enumerate() {
            assert!(boxes[i + 1..].iter().all(|b| !a.intersects(b)), "{a:?}");
            assert!(a.x >= 0.0, "{a:?} is cut on the left");
        }
        let labels: Vec<&str> = c.y_ticks.iter().map(|t| t.label.as_str()).collect();
        assert_eq!(labels, ["-50.0 k", "0", "50.0 k"]);
        assert_eq!(c.y_ticks[0].title, "-50,000.00");
    }

    /// A figure far too long for the old fixed margin: the margin grows with its label.
    #[test]
    fn the_margin_fits_the_longest_y_label() {
        let c = chart(&[(1.0, 14_206_745_464_648.0, "HUGE".into()), (2.0, -3.0, "SMALL".into())]);
        let widest = c.y_ticks.iter().map(|t| text_width(&t.label, FONT)).fold(0.0, f64::max);
        assert!(c.frame.left - 6.0 - widest >= TITLE_ROOM, "left {} for {widest}", c.frame.left);
        assert!(
            c.y_ticks.iter().any(|t| t.label.ends_with(" tn")),
            "{:?}",
            c.y_ticks.iter().map(|t| &t.label).collect::<Vec<_>>()
        );
    }

    proptest! {
        /// Random point sets: no two texts of the chart meet and none leaves the chart.
        #[test]
        fn texts_never_overlap(points in prop::collection::vec((-1e6..1e6_f64, -1e9..1e9_f64, "[A-Z]{2,6}-[0-9]{1,2}"), 0..40)) {
            let c = chart(&points);
            let boxes = text_boxes(&c);
            let frame = Rect { x: 0.0, y: 0.0, w: c.frame.width, h: c.frame.height };
            for (i, a) in boxes.iter().enumerate() {
                prop_assert!(a.inside(&frame), "{a:?}");
                for b in &boxes[i + 1..] {
                    prop_assert!(!a.intersects(b), "{a:?} meets {b:?}");
                }
            }
            prop_assert_eq!(c.points.iter().filter(|p| p.text.is_none()).count(), c.unlabelled.len());
        }
    }
}

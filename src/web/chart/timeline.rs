//! The roadmap's charts: the timeline (quarters across, one bar per zone from its start to the
//! month it goes live, grouped by area) and the monthly count of introductions against the
//! capacity.
//!
//! Every text is placed under the collision rule of [`super::labels`]: zone labels and area
//! headings first, then the quarter ticks, then the notes after the bars (on the other side of
//! the bar when the first side is taken, else left out: the table has them).

use super::labels::{FONT, Placer, Rect, fit_text, text_box, text_width};
use super::{Frame, Tick, spaced};

const WIDTH: f64 = 760.0;
/// At most this share of the width goes to the zone labels left of the bars.
const LABEL_SHARE: f64 = 0.22;
const ROW: f64 = 20.0;
const GROUP: f64 = 18.0;
/// Room above the plot for the plan years' names.
const TOP: f64 = 22.0;
const AXIS: f64 = 26.0;
/// The count chart sits beside the capital table: narrower, so its texts keep their size.
const COUNT_WIDTH: f64 = 520.0;

/// One zone on the timeline, in plan months (month 0 is the plan's start).
pub struct TimelineInput {
    /// Zone code, left of the bar.
    pub code: String,
    /// Area heading it is grouped under ("no area" for none).
    pub area: String,
    /// First month of its introduction window (may be before 0 for a committed zone).
    pub start: i32,
    /// The month it goes live (the first month after the window).
    pub live: i32,
    /// Committed (fixed by its baseline) rather than planned.
    pub committed: bool,
    /// Text after the bar ("live 2027-07").
    pub note: String,
    /// The whole story of the bar, its title.
    pub title: String,
}

/// One bar, in SVG units.
pub struct TimelineRow {
    /// Zone code (cut to fit).
    pub label: String,
    /// Title of the bar and its label.
    pub title: String,
    /// CSS class of the bar.
    pub class: &'static str,
    /// Bar left x.
    pub x: f64,
    /// Bar width.
    pub w: f64,
    /// Bar top y.
    pub y: f64,
    /// Bar height.
    pub h: f64,
    /// Baseline of the row's texts.
    pub text_y: f64,
    /// Text after (or before) the bar; empty when it fits nowhere.
    pub note: String,
    /// Where the note starts.
    pub note_x: f64,
    /// The window began before the plan's start (the bar is cut at the left edge).
    pub cut_left: bool,
}

/// An area heading between the groups of bars.
pub struct GroupHeading {
    /// The area's name.
    pub text: String,
    /// Baseline.
    pub y: f64,
}

/// A plan year's name above the plot, centred on `x`, with the line where the year begins.
pub struct YearMark {
    /// Left edge of the year.
    pub line_x: f64,
    /// Centre of its name.
    pub x: f64,
    /// Its name ("plan year 1").
    pub label: String,
}

/// The timeline chart.
pub struct Timeline {
    /// The SVG box and the plot area.
    pub frame: Frame,
    /// Quarter starts along the bottom (month names), with grid lines.
    pub ticks: Vec<Tick>,
    /// Every quarter boundary's x (grid lines, also where a tick's label was dropped).
    pub quarter_lines: Vec<f64>,
    /// Plan years above the plot.
    pub years: Vec<YearMark>,
    /// Area headings.
    pub groups: Vec<GroupHeading>,
    /// Bars.
    pub rows: Vec<TimelineRow>,
    /// Text summary.
    pub summary: String,
}

impl Timeline {
    /// Lay out `zones` (already in the order to draw: by area, then by start) over `years` plan
    /// years; `quarter_label(q)` names quarter `q`'s first month.
    pub fn new(zones: Vec<TimelineInput>, years: u32, quarter_label: impl Fn(u32) -> String, summary: String) -> Self {
        let months = f64::from(12 * years.max(1));
        let label_space = zones.iter().map(|z| text_width(&z.code, FONT)).fold(40.0, f64::max).min(WIDTH * LABEL_SHARE);
        let left = (label_space + 16.0).ceil();
        let right = WIDTH - 10.0;
        let x = |m: f64| left + (right - left) * m.clamp(0.0, months) / months;
        // Rows and headings top to bottom.
        let mut y = TOP;
        let mut groups = Vec::new();
        let mut rows = Vec::with_capacity(zones.len());
        let mut area: Option<String> = None;
        for z in zones {
            if area.as_deref() != Some(z.area.as_str()) {
                groups.push(GroupHeading { text: z.area.clone(), y: y + GROUP - 5.0 });
                y += GROUP;
                area = Some(z.area.clone());
            }
            let (a, b) = (x(f64::from(z.start)), x(f64::from(z.live)));
            let label = fit_text(&z.code, FONT, label_space);
            rows.push(TimelineRow {
                label,
                title: z.title,
                class: if z.committed { "bar-committed" } else { "bar-planned" },
                x: a,
                w: (b - a).max(1.0),
                y: y + 4.0,
                h: ROW - 8.0,
                text_y: y + ROW / 2.0 + 4.0,
                note_x: b + 5.0,
                note: z.note,
                cut_left: z.start < 0,
            });
            y += ROW;
        }
        let bottom = y.max(TOP + ROW);
        let height = bottom + AXIS;
        let mut placer = Placer::new(Rect { x: 0.0, y: 0.0, w: WIDTH, h: height });
        for g in &groups {
            placer.block(text_box(&g.text, FONT, 2.0, g.y));
        }
        for r in &rows {
            placer.block(text_box(&r.label, FONT, left - 8.0 - text_width(&r.label, FONT), r.text_y));
        }
        let years_marks: Vec<YearMark> = (0..years)
            .map(|y| {
                let (a, b) = (x(f64::from(12 * y)), x(f64::from(12 * y + 12)));
                YearMark { line_x: a, x: (a + b) / 2.0, label: format!("plan year {}", y + 1) }
            })
            .filter_map(|m| {
                let w = text_width(&m.label, FONT);
                placer.place([text_box(&m.label, FONT, m.x - w / 2.0, TOP - 8.0)]).map(|_| m)
            })
            .collect();
        let quarters = 4 * years.max(1);
        let quarter_lines = (0..=quarters).map(|q| x(f64::from(3 * q))).collect();
        let ticks = spaced(
            (0..quarters).map(|q| Tick::plain(x(f64::from(3 * q)), quarter_label(q))).collect(),
            bottom + 16.0,
            WIDTH,
            &[],
        );
        for t in &ticks {
            let w = text_width(&t.label, FONT);
            placer.block(text_box(&t.label, FONT, t.at - w / 2.0, bottom + 16.0));
        }
        // Notes last: after the bar, else before it, else left out.
        for r in rows.iter_mut().filter(|r| !r.note.is_empty()) {
            let w = text_width(&r.note, FONT);
            let sides = [r.note_x, r.x - 5.0 - w].map(|nx| text_box(&r.note, FONT, nx, r.text_y));
            match placer.place(sides) {
                Some((_, b)) => r.note_x = b.x,
                None => r.note.clear(),
            }
        }
        Self {
            frame: Frame { width: WIDTH, height, left, right, top: TOP, bottom },
            ticks,
            quarter_lines,
            years: years_marks,
            groups,
            rows,
            summary,
        }
    }

    /// Every text box the chart draws (for the tests of the collision rule).
    #[cfg(test)]
    pub fn text_boxes(&self) -> Vec<Rect> {
        let mut out: Vec<Rect> = self.groups.iter().map(|g| text_box(&g.text, FONT, 2.0, g.y)).collect();
        for r in &self.rows {
            out.push(text_box(&r.label, FONT, self.frame.left - 8.0 - text_width(&r.label, FONT), r.text_y));
            if !r.note.is_empty() {
                out.push(text_box(&r.note, FONT, r.note_x, r.text_y));
            }
        }
        for m in &self.years {
            out.push(text_box(&m.label, FONT, m.x - text_width(&m.label, FONT) / 2.0, TOP - 8.0));
        }
        for t in &self.ticks {
            out.push(text_box(&t.label, FONT, t.at - text_width(&t.label, FONT) / 2.0, self.frame.bottom + 16.0));
        }
        out
    }
}

/// One month's column of introductions.
pub struct CountColumn {
    /// Left x.
    pub x: f64,
    /// Width.
    pub w: f64,
    /// Top y.
    pub y: f64,
    /// Height.
    pub h: f64,
    /// More introductions than the capacity (committed zones alone can do that).
    pub over: bool,
    /// "2027-03: 2 of 2".
    pub title: String,
}

/// The monthly count of zones inside their introduction window, against the capacity.
pub struct CountChart {
    /// The SVG box and the plot area.
    pub frame: Frame,
    /// Columns, one per plan month.
    pub columns: Vec<CountColumn>,
    /// Y of the capacity line and its label's x.
    pub capacity_y: f64,
    /// The capacity line's text.
    pub capacity_label: String,
    /// Where the capacity text starts.
    pub capacity_x: f64,
    /// Count ticks up the side.
    pub y_ticks: Vec<Tick>,
    /// Month ticks along the bottom.
    pub x_ticks: Vec<Tick>,
    /// Text summary.
    pub summary: String,
}

impl CountChart {
    /// `counts` per plan month against `capacity`; `month_label(m)` names plan month `m`.
    pub fn new(counts: &[u32], capacity: u32, month_label: impl Fn(usize) -> String, summary: String) -> Self {
        let (top, bottom) = (14.0, 120.0);
        let max = counts.iter().copied().max().unwrap_or(0).max(capacity).max(1) + 1;
        let step = if max > 8 { max.div_ceil(5) } else { 1 };
        let values: Vec<u32> = (0..=max).step_by(step as usize).collect();
        let labels: Vec<String> = values.iter().map(u32::to_string).collect();
        let left = super::left_for(labels.iter().map(String::as_str), 0.0).max(30.0);
        let right = COUNT_WIDTH - 10.0;
        let y = |c: f64| bottom - (bottom - top) * c / f64::from(max);
        let y_ticks: Vec<Tick> =
            values.iter().zip(labels).map(|(v, label)| Tick::plain(y(f64::from(*v)), label)).collect();
        let n = counts.len().max(1);
        let slot = (right - left) / n as f64;
        let columns = counts
            .iter()
            .enumerate()
            .map(|(i, c)| CountColumn {
                x: left + slot * i as f64 + slot * 0.15,
                w: (slot * 0.7).max(0.5),
                y: y(f64::from(*c)),
                h: bottom - y(f64::from(*c)),
                over: *c > capacity,
                title: format!("{}: {c} of {capacity}", month_label(i)),
            })
            .collect();
        let capacity_label = format!("introductions at a time: {capacity}");
        let capacity_y = y(f64::from(capacity));
        let x_ticks = spaced(
            (0..n).step_by(6).map(|i| Tick::plain(left + slot * (i as f64 + 0.5), month_label(i))).collect(),
            bottom + 16.0,
            COUNT_WIDTH,
            &super::y_label_boxes(&y_ticks, left),
        );
        Self {
            frame: Frame { width: COUNT_WIDTH, height: bottom + AXIS, left, right, top, bottom },
            columns,
            capacity_y,
            capacity_x: right - text_width(&capacity_label, FONT),
            capacity_label,
            y_ticks,
            x_ticks,
            summary,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn zone(code: &str, area: &str, start: i32, live: i32, note: &str) -> TimelineInput {
        TimelineInput {
            code: code.into(),
            area: area.into(),
            start,
            live,
            committed: start < 0,
            note: note.into(),
            title: String::new(),
        }
    }

    /// Hand-placed: 3 plan years over a plot from `left` to 750; a zone from month 3 to 9 spans
    /// a twelfth of the width per 3 months.
    #[test]
    fn bars_run_from_start_to_live() {
        let t = Timeline::new(
            vec![zone("PRESS-1", "press shop", 3, 9, "live 2027-10"), zone("PAINT-1", "paint shop", -4, 2, "")],
            3,
            |q| format!("Q{q}"),
            String::new(),
        );
        let (l, r) = (t.frame.left, t.frame.right);
        assert_eq!(r, 750.0);
        let per_month = (r - l) / 36.0;
        assert!((t.rows[0].x - (l + 3.0 * per_month)).abs() < 1e-9);
        assert!((t.rows[0].w - 6.0 * per_month).abs() < 1e-9);
        // A committed window that began before the plan is cut at the left edge.
        assert!(t.rows[1].cut_left && (t.rows[1].x - l).abs() < 1e-9);
        assert_eq!(t.rows[1].class, "bar-committed");
        assert_eq!(t.groups.len(), 2);
        assert_eq!(t.quarter_lines.len(), 13);
        assert_eq!(t.rows[0].note, "live 2027-10");
    }

    #[test]
    fn the_capacity_line_sits_at_its_count() {
        let c = CountChart::new(&[0, 1, 2, 3], 2, |m| format!("m{m}"), String::new());
        // Scale 0..4 over 14..120: the capacity 2 is half way.
        assert!((c.capacity_y - 67.0).abs() < 1e-9);
        assert!(c.columns[3].over && !c.columns[2].over);
        assert_eq!(c.columns[2].title, "m2: 2 of 2");
    }

    proptest! {
        /// Random timelines: no two texts meet and none leaves the chart.
        #[test]
        fn texts_never_overlap(
            zones in prop::collection::vec(("[A-Z]{2,6}-[0-9]{1,2}", 0..3_usize, -12..48_i32, 1..20_i32, "[a-z0-9 -]{0,30}"), 1..25),
            years in 1..6_u32,
        ) {
            let areas = ["press shop", "paint shop", ""];
            let mut input: Vec<TimelineInput> = zones
                .iter()
                .map(|(c, a, s, w, n)| zone(c, areas[*a], *s, s + w, n))
                .collect();
            input.sort_by(|a, b| a.area.cmp(&b.area));
            let t = Timeline::new(input, years, |q| format!("2027-{:02}", q % 12 + 1), String::new());
            let frame = Rect { x: 0.0, y: 0.0, w: t.frame.width, h: t.frame.height };
            let boxes = t.text_boxes();
            for (i, a) in boxes.iter().enumerate() {
                prop_assert!(a.inside(&frame), "{a:?}");
                for b in &boxes[i + 1..] {
                    prop_assert!(!a.intersects(b), "{a:?} meets {b:?}");
                }
            }
        }
    }
}

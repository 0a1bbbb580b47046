//! Text boxes in a chart: how wide a label is, and the collision rule that places labels so
//! that no two of them overlap.
//!
//! The rule: labels are placed one at a time, most important first (the order given). Each
//! label has candidate boxes in order of preference (right of its point, then left, above,
//! below, ...); it takes the first candidate that lies inside the chart and meets no box taken
//! before it (labels already placed and the obstacles blocked first: points, tick labels, axis
//! titles). A label with no free candidate is left out of the chart, and the chart says which
//! ones the table shows instead.

/// A box in SVG user units: left, top, width, height.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Rect {
    /// Left edge.
    pub x: f64,
    /// Top edge.
    pub y: f64,
    /// Width.
    pub w: f64,
    /// Height.
    pub h: f64,
}

impl Rect {
    /// Whether the two boxes share any area (touching edges do not count).
    pub fn intersects(&self, o: &Rect) -> bool {
        self.x < o.x + o.w && o.x < self.x + self.w && self.y < o.y + o.h && o.y < self.y + self.h
    }

    /// Whether this box lies wholly inside `outer`.
    pub fn inside(&self, outer: &Rect) -> bool {
        self.x >= outer.x
            && self.y >= outer.y
            && self.x + self.w <= outer.x + outer.w
            && self.y + self.h <= outer.y + outer.h
    }
}

/// Font size of tick labels and chart labels (`.chart .tick` in style.css), in SVG user units.
pub const FONT: f64 = 11.0;

/// The width of `text` at `size`, estimated on the wide side for the sans-serif fonts the pages
/// fall back to (advance widths of DejaVu Sans, the widest common one, rounded up), so that
/// boxes kept apart here are apart on the page.
pub fn text_width(text: &str, size: f64) -> f64 {
    let em: f64 = text
        .chars()
        .map(|c| match c {
            '.' | ',' | ':' | ';' | '\'' | '|' | '!' | 'i' | 'l' | 'j' | ' ' | '\u{a0}' => 0.34,
            '-' | '(' | ')' | 'f' | 't' | 'r' | 'I' => 0.45,
            'm' | 'w' | '%' => 1.0,
            'M' | 'W' => 1.05,
            c if c.is_ascii_digit() => 0.66,
            c if c.is_ascii_uppercase() => 0.8,
            c if c.is_ascii_lowercase() => 0.64,
            _ => 0.85,
        })
        .sum();
    em * size
}

/// The box of a text of `size` with its baseline at `baseline`, starting at `x` (anchor start).
pub fn text_box(text: &str, size: f64, x: f64, baseline: f64) -> Rect {
    // Ascent and descent of the font, rounded up: 0.95 and 0.25 of the size.
    Rect { x, y: baseline - 0.95 * size, w: text_width(text, size), h: 1.2 * size }
}

/// `text` cut to at most `width` at `size`, with an ellipsis when cut.
pub fn fit_text(text: &str, size: f64, width: f64) -> String {
    if text_width(text, size) <= width {
        return text.to_string();
    }
    let mut out = String::new();
    for c in text.chars() {
        let next = format!("{out}{c}…");
        if text_width(&next, size) > width {
            break;
        }
        out.push(c);
    }
    format!("{}…", out.trim_end())
}

/// Places labels under the collision rule of the module docs.
pub struct Placer {
    bounds: Rect,
    taken: Vec<Rect>,
}

impl Placer {
    /// A placer for a chart whose labels must stay inside `bounds`.
    pub fn new(bounds: Rect) -> Self {
        Self { bounds, taken: Vec::new() }
    }

    /// Keep `r` free of labels placed later (a point, a line of text placed by hand).
    pub fn block(&mut self, r: Rect) {
        self.taken.push(r);
    }

    /// Place a label: the index and box of its first free candidate, now taken; `None` when
    /// every candidate is out of bounds or meets a box taken before.
    pub fn place(&mut self, candidates: impl IntoIterator<Item = Rect>) -> Option<(usize, Rect)> {
        let found = candidates
            .into_iter()
            .enumerate()
            .find(|(_, c)| c.inside(&self.bounds) && !self.taken.iter().any(|t| t.intersects(c)))?;
        self.taken.push(found.1);
        Some(found)
    }
}

/// Where a point's label may go, in order of preference: right of the point, left, above,
/// below, then right and left shifted up and down by a line. `r` is the point's radius; the
/// boxes keep a gap of 3 units from it.
pub fn around_point(px: f64, py: f64, r: f64, w: f64, h: f64) -> [Rect; 8] {
    let gap = r + 3.0;
    let (right, left, mid) = (px + gap, px - gap - w, py - h / 2.0);
    [
        Rect { x: right, y: mid, w, h },
        Rect { x: left, y: mid, w, h },
        Rect { x: px - w / 2.0, y: py - gap - h, w, h },
        Rect { x: px - w / 2.0, y: py + gap, w, h },
        Rect { x: right, y: mid - h, w, h },
        Rect { x: right, y: mid + h, w, h },
        Rect { x: left, y: mid - h, w, h },
        Rect { x: left, y: mid + h, w, h },
    ]
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    const BOUNDS: Rect = Rect { x: 0.0, y: 0.0, w: 560.0, h: 300.0 };

    /// Place a label of `width` beside each point, the points blocked first; what each got.
    fn place_all(points: &[(f64, f64, f64)]) -> (Vec<Rect>, Vec<Option<Rect>>) {
        let mut p = Placer::new(BOUNDS);
        let dots: Vec<Rect> =
            points.iter().map(|&(x, y, _)| Rect { x: x - 6.0, y: y - 6.0, w: 12.0, h: 12.0 }).collect();
        for d in &dots {
            p.block(*d);
        }
        let labels =
            points.iter().map(|&(x, y, w)| p.place(around_point(x, y, 6.0, w, 13.0)).map(|(_, r)| r)).collect();
        (dots, labels)
    }

    /// A hand-made example, drawn on squared paper: two points side by side and a third just
    /// below the second.
    #[test]
    fn close_points_take_the_next_free_side() {
        let (_, got) = place_all(&[(100.0, 100.0, 30.0), (130.0, 100.0, 30.0), (130.0, 112.0, 30.0)]);
        // The first label's right (109..139) meets the second point (124..136): it goes left,
        // ending 9 before its point.
        assert_eq!(got[0], Some(Rect { x: 61.0, y: 93.5, w: 30.0, h: 13.0 }));
        // The second takes its right.
        assert_eq!(got[1], Some(Rect { x: 139.0, y: 93.5, w: 30.0, h: 13.0 }));
        // The third: right meets the second label, left meets the first point, above meets the
        // second label; below (starting 9 under the point) is free.
        assert_eq!(got[2], Some(Rect { x: 115.0, y: 121.0, w: 30.0, h: 13.0 }));
    }

    /// A label with no free side is left out, not drawn over another.
    #[test]
    fn a_crowded_label_is_left_out() {
        let mut p = Placer::new(BOUNDS);
        p.block(Rect { x: 0.0, y: 0.0, w: 560.0, h: 300.0 });
        assert_eq!(p.place(around_point(200.0, 150.0, 6.0, 30.0, 13.0)), None);
        // Positive control: the same label on an empty chart takes its first choice.
        let mut free = Placer::new(BOUNDS);
        assert_eq!(free.place(around_point(200.0, 150.0, 6.0, 30.0, 13.0)).map(|(i, _)| i), Some(0));
    }

    #[test]
    fn long_labels_are_cut_with_an_ellipsis() {
        assert_eq!(fit_text("Short", FONT, 200.0), "Short");
        let cut = fit_text("Unplanned die-change stops on the second shift", FONT, 120.0);
        assert!(cut.ends_with('…') && text_width(&cut, FONT) <= 120.0, "{cut}");
        assert!(cut.starts_with("Unplanned die"), "{cut}");
    }

    proptest! {
        /// Random point sets: no two placed labels meet, none meets a point, all stay inside.
        #[test]
        fn placed_labels_never_overlap(points in prop::collection::vec((0.0..560.0_f64, 0.0..300.0_f64, 10.0..120.0_f64), 0..60)) {
            let (dots, got) = place_all(&points);
            let placed: Vec<Rect> = got.into_iter().flatten().collect();
            for (i, a) in placed.iter().enumerate() {
                prop_assert!(a.inside(&BOUNDS));
                for b in &placed[i + 1..] {
                    prop_assert!(!a.intersects(b), "{a:?} meets {b:?}");
                }
                for d in &dots {
                    prop_assert!(!a.intersects(d), "{a:?} meets the point {d:?}");
                }
            }
        }
    }
}

//! Internal rate of return: every real root of NPV(r) = 0 in (-1, +inf), found robustly.
//!
//! The method is described in the documentation of [`irr`].

use rust_decimal::Decimal;
use rust_decimal::prelude::ToPrimitive;

use super::FinanceError;

/// Iteration limit of each one-dimensional root search (Newton steps plus bisection steps).
///
/// Bisection alone needs about 50 steps to pin a rate near 0 to the tolerance and under 160 for
/// the most extreme rates a `Decimal` series can have, so reaching the limit means a bug or
/// non-finite input, reported as [`FinanceError::NoConvergence`].
pub const IRR_MAX_ITERATIONS: u32 = 300;

/// Relative step (in the solver variable `s` described in [`irr`], Method) at which a root
/// search stops. The returned rate is then accurate to about `1e-14 * max(2, 1 + r)`, unless the
/// root is multiple or the flows are badly conditioned.
pub const IRR_TOLERANCE: f64 = 1e-14;

/// At a derivative root, a present value within this fraction of the sum of the absolute
/// discounted flows counts as zero: the NPV touches zero there (a root of even multiplicity,
/// or two roots closer than f64 evaluation can tell apart).
pub const IRR_TOUCH_TOLERANCE: f64 = 1e-12;

/// The internal rate(s) of return of a cash-flow series.
///
/// `roots` holds every rate in (-1, +inf) found to make NPV zero, sorted ascending, as rates per
/// period of the flows. `ambiguous` is true when the flows change sign more than once: then the
/// IRR is not guaranteed to be unique (there may be 0, 1 or several roots) and **MIRR or NPV at
/// the hurdle rate should decide**, not IRR.
///
/// `chosen` is the rate to show as "the" IRR:
/// 1. one sign change: the unique root;
/// 2. several sign changes and exactly one root: that root (flagged `ambiguous`);
/// 3. several roots: the *investment-like* root, the one where NPV crosses from positive to
///    negative as the rate rises (below it the flows are worth more than nothing at that rate),
///    if exactly one root is of that kind; roots that only touch zero never qualify;
/// 4. otherwise `None`: there is no defensible single IRR.
///
/// numpy-financial 1.0.0 instead returns the real root closest to zero; that root is always in
/// `roots`, but it can differ from `chosen`. Where numpy-financial returns NaN, we return
/// [`FinanceError::NoSignChange`] (flows of one sign) or, when the flows do change sign but no
/// real root exists, `Ok` with empty `roots`, `chosen = None` and `ambiguous = true`.
#[derive(Debug, Clone, PartialEq)]
pub struct IrrOutcome {
    /// Every root found, ascending, per period.
    pub roots: Vec<f64>,
    /// The rate shown as the IRR, by the rule above; `None` when no single rate is defensible.
    pub chosen: Option<f64>,
    /// The flows change sign more than once, so the IRR may not be unique or may not exist.
    pub ambiguous: bool,
}

/// Internal rate of return of evenly spaced cash flows.
///
/// Formula: the rates `r` in (-1, +inf) with `sum_{t=0..N} CF_t / (1 + r)^t = 0`, i.e.
/// [`crate::finance::npv`]`(r, flows) = 0`, with its timing and sign convention: `flows[0]` now,
/// undiscounted; outflows negative. The rates are per period of the flows (annualize monthly ones
/// with [`crate::finance::annual_from_periodic`]). See [`IrrOutcome`] for the roots returned,
/// the `chosen` rule and the `ambiguous` flag.
///
/// # Method
/// With `x = 1 / (1 + r)`, NPV is the polynomial `P(x) = sum_t CF_t x^t`, and rates in
/// (-1, +inf) are exactly the positive `x`. To evaluate without overflow over the whole range we
/// solve in a variable `s` in [0, 2]:
/// - `s` in (0, 1] is `x` itself (rates r >= 0, `r = 1/s - 1`), and `g(s) = P(s)`;
/// - `s` in [1, 2) stands for `1 + r = 2 - s` (rates in (-1, 0], `r = 1 - s`), and
///   `g(s) = (1 + r)^N P(x)`, the future value, which has the sign and the roots of NPV.
///
/// Both forms only raise numbers in [0, 1] to powers, `g` is continuous on [0, 2], and
/// `g(0) = CF_0` (the first non-zero flow) and `g(2) = CF_N` (the last non-zero flow).
///
/// - **One sign change** in the flows: by Descartes' rule of signs there is exactly one positive
///   root, and `g(0)`, `g(2)` have opposite signs. It is solved by Newton's method safeguarded
///   by bisection ("rtsafe", Numerical Recipes 3rd ed., section 9.4), starting from 10 % a period:
///   a few Horner evaluations, each linear in the number of flows; no scan, and no allocation
///   beyond the f64 copy of the flows and the one-element result.
/// - **Several sign changes**: the roots are isolated by Rolle's theorem: the real roots of the
///   derivative split (0, +inf) into intervals on which the NPV polynomial is monotone, so each
///   interval whose ends differ in sign holds exactly one root (solved as above), and a
///   derivative root where the value is zero within rounding is a root that touches zero
///   (even multiplicity). The derivative's roots are found the same way, down to a derivative
///   with at most one sign change (walked without recursion, holding one level at a time:
///   memory linear in the number of flows). This finds every root except pairs closer than
///   the rounding of f64 evaluation can separate.
///
/// # Errors
/// - [`FinanceError::EmptyFlows`] if `flows` is empty;
/// - [`FinanceError::NoSignChange`] if the non-zero flows all have the same sign (or all flows
///   are zero): NPV is then never zero;
/// - [`FinanceError::NoConvergence`] if a root search reaches [`IRR_MAX_ITERATIONS`] (not
///   expected: the search falls back to bisection inside a sign-change bracket).
///
/// Several sign changes without any real root is not an error: the outcome has empty `roots`,
/// `chosen = None` and `ambiguous = true`.
///
/// # Example
/// ```
/// use pilot_ledger::finance::irr;
/// use rust_decimal::Decimal;
///
/// // numpy-financial's irr documentation example: npf.irr([-100, 39, 59, 55, 20]) = 0.28095
/// // (rounded to 5 places).
/// let flows = [-100, 39, 59, 55, 20].map(Decimal::from);
/// let outcome = irr(&flows)?;
/// assert!(!outcome.ambiguous);
/// assert!((outcome.chosen.unwrap_or(f64::NAN) - 0.28095).abs() < 5e-6);
///
/// // Two sign changes, two roots: 25 % and 400 % (Lorie and Savage's pump example).
/// let pump = [-1600, 10_000, -10_000].map(Decimal::from);
/// let outcome = irr(&pump)?;
/// assert!(outcome.ambiguous);
/// assert_eq!(outcome.roots.len(), 2);
/// assert!((outcome.roots[0] - 0.25).abs() < 1e-12 && (outcome.roots[1] - 4.0).abs() < 1e-12);
/// # Ok::<(), pilot_ledger::finance::FinanceError>(())
/// ```
///
/// # Reference
/// numpy-financial 1.0.0, `numpy_financial.irr` (same equation, which cites L. J. Gitman,
/// *Principles of Managerial Finance, Brief*, 3rd ed., 2003, p. 348); Descartes' rule of signs
/// and multiple IRRs: Brealey, Myers and Allen, *Principles of Corporate Finance*, chapter "Net
/// Present Value and Other Investment Criteria";
/// J. H. Lorie and L. J. Savage, "Three Problems in Rationing Capital", *Journal of Business*,
/// 1955.
pub fn irr(flows: &[Decimal]) -> Result<IrrOutcome, FinanceError> {
    if flows.is_empty() {
        return Err(FinanceError::EmptyFlows);
    }
    // Sign changes are counted on the exact Decimals, zeros ignored.
    let changes = sign_changes(flows.iter().map(decimal_sign));
    if changes == 0 {
        return Err(FinanceError::NoSignChange);
    }
    outcome_of(&DensePoly::from_flows(flows)?, changes)
}

/// The IRR outcome of a series whose flows change sign `changes` (> 0) times: one sign change
/// has exactly one root, found directly; more are all searched for.
pub(crate) fn outcome_of<S: Series>(series: &S, changes: usize) -> Result<IrrOutcome, FinanceError> {
    if changes == 1 {
        let root = solve_single(series)?;
        return Ok(IrrOutcome { roots: vec![root], chosen: Some(root), ambiguous: false });
    }
    Ok(outcome_from_roots(all_roots(series)?))
}

/// Solves a series with exactly one sign change (one root) on the whole of [0, 2].
pub(crate) fn solve_single<S: Series>(series: &S) -> Result<f64, FinanceError> {
    let (g0, _) = series.ends();
    let s = solve_bracket(series, 0.0, 2.0, g0, start_guess(series))?;
    Ok(rate_from_s(s))
}

/// The outcome of a several-sign-change series from its roots (ascending in `s`).
pub(crate) fn outcome_from_roots(found: Vec<FoundRoot>) -> IrrOutcome {
    let chosen = match found.as_slice() {
        [only] => Some(rate_from_s(only.s)),
        _ => {
            // Rising in s is falling in rate: NPV goes from + to - as the rate rises.
            let mut investment_like = found.iter().filter(|f| f.rising == Some(true));
            match (investment_like.next(), investment_like.next()) {
                (Some(one), None) => Some(rate_from_s(one.s)),
                _ => None,
            }
        }
    };
    // s ascending is rate descending.
    let roots = found.iter().rev().map(|f| rate_from_s(f.s)).collect();
    IrrOutcome { roots, chosen, ambiguous: true }
}

/// Rate per period for a solver variable `s` in (0, 2) (see [`irr`], Method).
pub(crate) fn rate_from_s(s: f64) -> f64 {
    if s <= 1.0 { 1.0 / s - 1.0 } else { 1.0 - s }
}

/// Solver variable for a rate in (-1, +inf); inverse of [`rate_from_s`].
pub(crate) fn s_from_rate(rate: f64) -> f64 {
    if rate >= 0.0 { 1.0 / (1.0 + rate) } else { 1.0 - rate }
}

/// -1, 0 or +1.
pub(crate) fn decimal_sign(d: &Decimal) -> i8 {
    if d.is_zero() {
        0
    } else if d.is_sign_negative() {
        -1
    } else {
        1
    }
}

/// Number of sign changes in a sequence of signs (-1, 0, +1), zeros skipped.
pub(crate) fn sign_changes<I: IntoIterator<Item = i8>>(signs: I) -> usize {
    let mut last = 0;
    let mut changes = 0;
    for s in signs.into_iter().filter(|&s| s != 0) {
        if last != 0 && s != last {
            changes += 1;
        }
        last = s;
    }
    changes
}

/// A function of the solver variable `s` in [0, 2] with the sign of a present value.
///
/// Implemented by the NPV polynomial of evenly spaced flows and by the generalized polynomial
/// (real exponents) of dated flows, so the same root isolation serves IRR and XIRR.
pub(crate) trait Series: Sized {
    /// `g(s)` and `dg/ds`.
    fn eval(&self, s: f64) -> (f64, f64);
    /// The sum of the absolute values of the terms of `g(s)`: the scale of its rounding error.
    fn magnitude(&self, s: f64) -> f64;
    /// `g(0)` and `g(2)`: the lowest- and highest-exponent coefficients (both non-zero).
    fn ends(&self) -> (f64, f64);
    /// Sign changes of the coefficients ordered by exponent (Descartes' bound on the roots).
    fn sign_changes(&self) -> usize;
    /// A series of the same kind from `(coefficient, exponent)` terms ascending in exponent,
    /// the first non-zero (for evenly spaced flows, consecutive whole exponents): a level of
    /// the Rolle chain (see [`all_roots`]), normalized like the series itself.
    fn from_terms(terms: Vec<(f64, f64)>) -> Self;
    /// `(coefficient, exponent)` of each term, ascending in exponent (zeros included).
    fn terms(&self) -> impl Iterator<Item = (f64, f64)>;
}

/// A starting point for the one-root search, in the solver variable: the rate at which the
/// positive and the negative terms, each collapsed to its value-weighted mean time, are equal,
/// `r0 = (P / N)^(1 / (t_P - t_N)) - 1` (the duration approximation of an IRR, common
/// practice). It only saves iterations: the bracketed search converges from any start.
fn start_guess<S: Series>(series: &S) -> f64 {
    let (mut p, mut tp, mut n, mut tn) = (0.0, 0.0, 0.0, 0.0);
    for (c, e) in series.terms() {
        if c > 0.0 {
            p += c;
            tp += c * e;
        } else {
            n -= c;
            tn -= c * e;
        }
    }
    let span = tp / p - tn / n;
    let r0 = ((p / n).ln() / span).exp_m1();
    if r0.is_finite() && r0 > -0.99 && span.abs() > 1e-9 { s_from_rate(r0) } else { s_from_rate(0.1) }
}

/// The NPV polynomial `sum_t a_t x^t` of evenly spaced flows, with zero leading and trailing
/// coefficients removed (they only add roots at x = 0 or change nothing) and scaled by a power of
/// two so that the largest coefficient is in [1, 2) (scaling changes no root and keeps the
/// recursion from overflowing).
pub(crate) struct DensePoly {
    coeffs: Vec<f64>,
}

impl DensePoly {
    fn from_flows(flows: &[Decimal]) -> Result<Self, FinanceError> {
        let coeffs = flows
            .iter()
            .map(|d| decimal_to_f64(d).ok_or(FinanceError::NotRepresentable))
            .collect::<Result<Vec<_>, _>>()?;
        Ok(Self::normalized(coeffs))
    }

    pub(crate) fn normalized(mut coeffs: Vec<f64>) -> Self {
        while coeffs.last() == Some(&0.0) {
            coeffs.pop();
        }
        let lead = coeffs.iter().take_while(|&&c| c == 0.0).count();
        coeffs.drain(..lead);
        let scale = coeffs.iter().fold(0.0_f64, |m, c| m.max(c.abs()));
        if scale > 0.0 {
            // A power of two near the largest coefficient: scaling by it is exact, and a
            // multiplication rather than one division per coefficient.
            let factor = (-scale.log2().floor()).exp2();
            coeffs.iter_mut().for_each(|c| *c *= factor);
        }
        Self { coeffs }
    }
}

impl Series for DensePoly {
    fn eval(&self, s: f64) -> (f64, f64) {
        let (mut p, mut dp) = (0.0, 0.0);
        if s <= 1.0 {
            // Horner from the highest power: sum a_t s^t.
            for &a in self.coeffs.iter().rev() {
                dp = dp * s + p;
                p = p * s + a;
            }
            (p, dp)
        } else {
            // Future-value form in y = 1 + r = 2 - s: sum a_t y^(N - t); dy/ds = -1.
            let y = 2.0 - s;
            for &a in &self.coeffs {
                dp = dp * y + p;
                p = p * y + a;
            }
            (p, -dp)
        }
    }

    fn magnitude(&self, s: f64) -> f64 {
        let z = if s <= 1.0 { s } else { 2.0 - s };
        let horner = |acc: f64, a: &f64| acc * z + a.abs();
        if s <= 1.0 { self.coeffs.iter().rev().fold(0.0, horner) } else { self.coeffs.iter().fold(0.0, horner) }
    }

    fn ends(&self) -> (f64, f64) {
        let first = self.coeffs.first().copied().unwrap_or(0.0);
        let last = self.coeffs.last().copied().unwrap_or(0.0);
        (first, last)
    }

    fn sign_changes(&self) -> usize {
        sign_changes(self.coeffs.iter().map(|&c| signum(c)))
    }

    fn from_terms(terms: Vec<(f64, f64)>) -> Self {
        Self::normalized(terms.into_iter().map(|(c, _)| c).collect())
    }

    fn terms(&self) -> impl Iterator<Item = (f64, f64)> {
        self.coeffs.iter().enumerate().map(|(t, &a)| (a, t as f64))
    }
}

/// `Decimal` to the nearest f64. Money has few decimals, so the mantissa usually fits 53 bits:
/// then `mantissa / 10^scale` is one correctly rounded division of two exact f64 values, far
/// cheaper than the general conversion, which handles the rest.
pub(crate) fn decimal_to_f64(d: &Decimal) -> Option<f64> {
    const POW10: [f64; 23] = [
        1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19,
        1e20, 1e21, 1e22,
    ];
    let m = d.mantissa();
    match POW10.get(d.scale() as usize) {
        // Below 2^53 the mantissa fits an i64 exactly, and i64 -> f64 is one instruction
        // (i128 -> f64 is a library call).
        Some(p) if m.unsigned_abs() < 1 << 53 => Some(m as i64 as f64 / p),
        _ => d.to_f64(),
    }
}

/// A root in the solver variable, with the direction in which `g` crosses zero there.
#[derive(Debug, Clone, Copy)]
pub(crate) struct FoundRoot {
    /// The root, in the solver variable `s`.
    pub(crate) s: f64,
    /// `Some(true)`: `g` goes from negative to positive as `s` rises (NPV from positive to
    /// negative as the rate rises); `Some(false)`: the opposite; `None`: it touches zero.
    pub(crate) rising: Option<bool>,
}

/// Every root of `series` in (0, 2), ascending in `s`, by Rolle isolation (see [`irr`]).
///
/// The chain of derivatives is walked without recursion and without keeping a copy of every
/// level (a series with thousands of sign changes has thousands of levels): one pass up finds
/// how deep the chain goes and where each level starts, keeping only each term's running
/// multiplier; the pass down divides the multipliers back out and solves each level between the
/// roots of the level below it. Memory is a few values per term plus one level at a time.
pub(crate) fn all_roots<S: Series>(series: &S) -> Result<Vec<FoundRoot>, FinanceError> {
    let mut chain = Chain::new(series);
    // Pass up: the first term of each level, down to a level with at most one sign change.
    let mut firsts = vec![0];
    let mut deepest = None;
    let mut changes = series.sign_changes();
    while changes > 1 {
        let first = firsts.last().copied().unwrap_or(0);
        chain.step(first, Step::Up);
        let Some((next, level)) = chain.level::<S>(first + 1) else {
            // Not reached: the last term never vanishes. Stay on the level reached.
            chain.step(first, Step::Down);
            break;
        };
        changes = level.sign_changes();
        firsts.push(next);
        deepest = Some(level);
    }
    // The deepest level has at most one sign change: its root, if any, is found directly.
    let mut roots = match &deepest {
        Some(level) => monotone_roots(level)?,
        None => return monotone_roots(series),
    };
    // Pass down: each level's roots lie between the roots of the level below it.
    firsts.pop();
    while let Some(first) = firsts.pop() {
        chain.step(first, Step::Down);
        roots = if firsts.is_empty() {
            roots_between(series, &roots)?
        } else {
            let level = chain.level::<S>(first).map(|(_, level)| level);
            match level {
                Some(level) => roots_between(&level, &roots)?,
                None => Vec::new(),
            }
        };
    }
    Ok(roots)
}

/// The roots of a series with at most one sign change (none or exactly one root).
fn monotone_roots<S: Series>(series: &S) -> Result<Vec<FoundRoot>, FinanceError> {
    let (g0, g2) = series.ends();
    if series.sign_changes() != 1 {
        return Ok(Vec::new());
    }
    let s = solve_bracket(series, 0.0, 2.0, g0, 1.0)?;
    Ok(vec![FoundRoot { s, rising: Some(g2 > 0.0) }])
}

/// The roots of `series` given the roots of its derivative (its critical points), ascending.
fn roots_between<S: Series>(series: &S, critical: &[FoundRoot]) -> Result<Vec<FoundRoot>, FinanceError> {
    let (g0, g2) = series.ends();
    // Ends and critical points, each with its sign (0 = zero within rounding).
    let mut points: Vec<(f64, f64, i8)> = Vec::with_capacity(critical.len() + 2);
    points.push((0.0, g0, signum(g0)));
    for c in critical {
        let (g, _) = series.eval(c.s);
        let zero = g.abs() <= IRR_TOUCH_TOLERANCE * series.magnitude(c.s);
        points.push((c.s, g, if zero { 0 } else { signum(g) }));
    }
    points.push((2.0, g2, signum(g2)));

    let mut roots = Vec::new();
    let mut i = 0;
    while i + 1 < points.len() {
        let (a, ga, sa) = points[i];
        let (b, _, sb) = points[i + 1];
        if sb == 0 {
            // A run of critical points at zero is one touching (or flat) root: keep the point
            // with the smallest value, and read the crossing from the signs around the run.
            let mut j = i + 1;
            let mut best = points[j];
            while points[j + 1].2 == 0 {
                j += 1;
                if points[j].1.abs() < best.1.abs() {
                    best = points[j];
                }
            }
            let after = points[j + 1].2;
            roots.push(FoundRoot { s: best.0, rising: (after != sa).then_some(after > 0) });
            i = j;
        } else {
            if sa != 0 && sa != sb {
                // Monotone between consecutive critical points: exactly one root inside.
                let s = solve_bracket(series, a, b, ga, 0.5 * (a + b))?;
                roots.push(FoundRoot { s, rising: Some(sb > 0) });
            }
            i += 1;
        }
    }
    Ok(roots)
}

/// Multiply or divide in [`Chain::step`].
#[derive(Clone, Copy, PartialEq)]
enum Step {
    Up,
    Down,
}

/// The Rolle chain of a series, one level at a time.
///
/// Level `k + 1` is the derivative in `x` of `x^(-E_k)` times level `k`, `E_k` being the
/// exponent of level `k`'s first term: the first term drops out and term `i` is multiplied by
/// `e_i - E_k`. So level `k`'s coefficient of term `i` is the base coefficient times a product
/// of such factors, kept here as a mantissa and a power of 2^[`Chain::BLOCK`] (the product of a
/// few thousand factors is far outside f64's range). A term whose coefficient falls below f64's
/// range next to the level's largest is zero in that level, as when the levels were computed
/// one from the other.
struct Chain {
    exponents: Vec<f64>,
    mantissas: Vec<f64>,
    blocks: Vec<i32>,
}

impl Chain {
    const BLOCK: i32 = 500;

    fn new<S: Series>(series: &S) -> Self {
        let (mantissas, exponents): (Vec<f64>, Vec<f64>) = series.terms().unzip();
        let blocks = vec![0; mantissas.len()];
        Self { exponents, mantissas, blocks }
    }

    /// From the level whose first term is `first` to the next one (`Up`), or back (`Down`).
    fn step(&mut self, first: usize, step: Step) {
        let Some(&e0) = self.exponents.get(first) else {
            return;
        };
        let big = f64::from(Self::BLOCK).exp2();
        let small = f64::from(-Self::BLOCK).exp2();
        let terms = self.mantissas.iter_mut().zip(&mut self.blocks).zip(&self.exponents).skip(first + 1);
        for ((m, b), &e) in terms {
            if step == Step::Up {
                *m *= e - e0;
            } else {
                *m /= e - e0;
            }
            // Powers of two: exact.
            if m.abs() > big {
                *m *= small;
                *b += 1;
            } else if *m != 0.0 && m.abs() < small {
                *m *= big;
                *b -= 1;
            }
        }
    }

    /// The level made of the terms from `from` on, scaled so that its largest coefficient is
    /// near 1, and the index of its first non-zero term; `None` if every term is zero.
    fn level<S: Series>(&self, from: usize) -> Option<(usize, S)> {
        let log2 = |i: usize| f64::from(self.blocks[i] * Self::BLOCK) + self.mantissas[i].abs().log2();
        let top = (from..self.mantissas.len())
            .filter(|&i| self.mantissas[i] != 0.0)
            .map(log2)
            .fold(f64::NEG_INFINITY, f64::max);
        if !top.is_finite() {
            return None;
        }
        let shift = top.floor();
        let coefficient = |i: usize| {
            // m * 2^(block * BLOCK - shift) in two exact scalings, so that a term below the
            // range underflows once, like the product it stands for.
            let k = f64::from(self.blocks[i] * Self::BLOCK) - shift;
            let half = (0.5 * k).trunc();
            self.mantissas[i] * half.exp2() * (k - half).exp2()
        };
        let coefficients: Vec<f64> = (from..self.mantissas.len()).map(coefficient).collect();
        let lead = coefficients.iter().take_while(|&&c| c == 0.0).count();
        let terms = coefficients.into_iter().zip(&self.exponents[from..]).skip(lead).map(|(c, &e)| (c, e)).collect();
        Some((from + lead, S::from_terms(terms)))
    }
}

pub(crate) fn signum(v: f64) -> i8 {
    if v > 0.0 {
        1
    } else if v < 0.0 {
        -1
    } else {
        0
    }
}

/// Newton's method safeguarded by bisection on a bracket `[lo, hi]` where `g` changes sign
/// (`g_lo = g(lo)`, of the opposite sign to `g(hi)`), starting from `start`.
///
/// A Newton step is taken only when it stays inside the current bracket and the previous step
/// more than halved the residual; otherwise the bracket is bisected, so the search always
/// converges (Numerical Recipes 3rd ed., section 9.4, `rtsafe`).
pub(crate) fn solve_bracket<S: Series>(
    series: &S,
    lo: f64,
    hi: f64,
    g_lo: f64,
    start: f64,
) -> Result<f64, FinanceError> {
    // Orient the bracket so that g(neg) < 0 < g(pos).
    let (mut neg, mut pos) = if g_lo < 0.0 { (lo, hi) } else { (hi, lo) };
    let mut x = if start > lo.min(hi) && start < lo.max(hi) { start } else { 0.5 * (lo + hi) };
    let mut dx_old = (hi - lo).abs();
    let mut dx = dx_old;
    let (mut g, mut dg) = series.eval(x);
    for _ in 0..IRR_MAX_ITERATIONS {
        if g == 0.0 {
            return Ok(x);
        }
        if g < 0.0 {
            neg = x;
        } else {
            pos = x;
        }
        let newton = x - g / dg;
        // A Newton step below the tolerance: x is the root to working precision. (Without this
        // test a step that rounds onto the bracket's end would look like a failed step and
        // start a long bisection.)
        if newton.is_finite() && (newton - x).abs() <= IRR_TOLERANCE * x.abs() + f64::MIN_POSITIVE {
            return Ok(x);
        }
        let bisect = !newton.is_finite()
            || newton <= neg.min(pos)
            || newton >= neg.max(pos)
            || (2.0 * g).abs() > (dx_old * dg).abs();
        dx_old = dx;
        if bisect {
            dx = 0.5 * (pos - neg);
            x = neg + dx;
        } else {
            dx = x - newton;
            x = newton;
        }
        let tol = IRR_TOLERANCE * x.abs() + f64::MIN_POSITIVE;
        if dx.abs() <= tol || (pos - neg).abs() <= tol {
            return Ok(x);
        }
        (g, dg) = series.eval(x);
    }
    Err(FinanceError::NoConvergence { iterations: IRR_MAX_ITERATIONS })
}

#[cfg(test)]
mod tests {
    #![expect(clippy::unwrap_used)]
    use super::*;

    use crate::finance::test_flows as flows;

    #[test]
    fn s_mapping_round_trips() {
        for r in [-0.999, -0.5, -1e-9, 0.0, 1e-9, 0.1, 4.0, 1e12] {
            let back = rate_from_s(s_from_rate(r));
            assert!((back - r).abs() <= 1e-15 * r.abs().max(1.0), "{r} -> {back}");
        }
    }

    #[test]
    fn no_sign_change_and_empty() {
        assert_eq!(irr(&[]), Err(FinanceError::EmptyFlows));
        assert_eq!(irr(&flows(&[1, 2, 0, 3])), Err(FinanceError::NoSignChange));
        assert_eq!(irr(&flows(&[0, 0])), Err(FinanceError::NoSignChange));
    }

    #[test]
    fn simple_roots_including_negative_and_zero_padding() {
        // -100 + 110 / (1 + r) = 0 -> r = 10 %; zeros around do not matter except for timing.
        let o = irr(&flows(&[-100, 110])).unwrap();
        assert!((o.chosen.unwrap() - 0.1).abs() < 1e-15);
        // Leading zero: same root (x^1 factor removed); trailing zero too.
        let o = irr(&flows(&[0, -100, 110, 0])).unwrap();
        assert!((o.chosen.unwrap() - 0.1).abs() < 1e-15);
        // -100 + 50 / (1 + r) = 0 -> r = -50 %.
        let o = irr(&flows(&[-100, 50])).unwrap();
        assert!((o.chosen.unwrap() + 0.5).abs() < 1e-15);
        // Borrowing: +100 now, -121 in two periods -> 10 %.
        let o = irr(&flows(&[100, 0, -121])).unwrap();
        assert!((o.chosen.unwrap() - 0.1).abs() < 1e-14);
    }

    #[test]
    fn extreme_rates() {
        // -1 + 1e15 / (1 + r) = 0 -> r = 1e15 - 1.
        let o = irr(&flows(&[-1, 1_000_000_000_000_000])).unwrap();
        assert!((o.chosen.unwrap() / (1e15 - 1.0) - 1.0).abs() < 1e-13);
        // -1e6 + 1 / (1 + r)^2 -> 1 + r = 1e-3.
        let o = irr(&flows(&[-1_000_000, 0, 1])).unwrap();
        assert!((o.chosen.unwrap() + 0.999).abs() < 1e-14);
    }

    #[test]
    fn double_root_touches() {
        // -(1 - 1.1 x)^2 scaled: -100 + 220 x - 121 x^2 = -(10 - 11 x)^2: one double root at
        // x = 10/11, i.e. r = 10 %; NPV <= 0 everywhere, touching zero.
        let o = irr(&flows(&[-100, 220, -121])).unwrap();
        assert!(o.ambiguous);
        assert_eq!(o.roots.len(), 1);
        assert!((o.roots[0] - 0.1).abs() < 1e-6);
        assert!(o.chosen.is_some());
    }

    #[test]
    fn no_real_root_with_two_sign_changes() {
        // -100 + 250 x - 200 x^2 has a negative discriminant.
        let o = irr(&flows(&[-100, 250, -200])).unwrap();
        assert_eq!(o, IrrOutcome { roots: vec![], chosen: None, ambiguous: true });
    }

    #[test]
    fn three_roots_and_chosen_rule() {
        // Roots at 10 %, 20 %, 30 %: (1.1 - y)(1.2 - y)(1.3 - y) in y = 1 + r, as a future value
        // -y^3 + 3.6 y^2 - 4.31 y + 1.716 -> flows (times 1000) [-1000, 3600, -4310, 1716].
        let o = irr(&flows(&[-1000, 3600, -4310, 1716])).unwrap();
        assert_eq!(o.roots.len(), 3);
        for (r, want) in o.roots.iter().zip([0.1, 0.2, 0.3]) {
            assert!((r - want).abs() < 1e-12, "{r}");
        }
        // NPV is + just below 10 %, - between 10 and 20, + between 20 and 30, - above 30 %: two
        // investment-like roots (10 % and 30 %): no single defensible IRR.
        assert_eq!(o.chosen, None);
    }

    /// NPV at `rate` relative to the sum of the absolute discounted flows, computed apart from
    /// the solver: each term scaled by the largest discount factor, so no power overflows.
    fn relative_npv(rate: f64, flows: &[f64]) -> f64 {
        let ln_x = -rate.ln_1p();
        let top = flows.iter().enumerate().map(|(t, _)| t as f64 * ln_x).fold(f64::NEG_INFINITY, f64::max);
        let (mut sum, mut size) = (0.0, 0.0);
        for (t, &c) in flows.iter().enumerate() {
            let w = (t as f64 * ln_x - top).exp();
            sum += c * w;
            size += c.abs() * w;
        }
        (sum / size).abs()
    }

    /// The former search, one recursion level and one copy of the polynomial per derivative:
    /// the reference the iterative search must agree with.
    fn recursive_roots(p: &DensePoly) -> Vec<FoundRoot> {
        if p.sign_changes() <= 1 || p.coeffs.len() < 2 {
            return monotone_roots(p).unwrap();
        }
        let d = DensePoly::normalized(p.coeffs.iter().enumerate().skip(1).map(|(t, &a)| a * t as f64).collect());
        roots_between(p, &recursive_roots(&d)).unwrap()
    }

    /// A small linear congruential generator (Knuth's MMIX constants): reproducible flows.
    fn lcg(state: &mut u64) -> u64 {
        *state = state.wrapping_mul(6_364_136_223_846_793_005).wrapping_add(1_442_695_040_888_963_407);
        *state >> 33
    }

    #[test]
    fn six_thousand_alternating_flows_answer() {
        // -1 + x - x^2 + ... - x^5999 = -(1 - x^6000) / (1 + x): the one positive root is x = 1,
        // a rate of 0. The former recursion went 6,000 levels deep and overflowed the stack.
        let alternating: Vec<i64> = (0..6000).map(|t| if t % 2 == 0 { -1 } else { 1 }).collect();
        let o = irr(&flows(&alternating)).unwrap();
        assert!(o.ambiguous);
        assert_eq!(o.roots.len(), 1);
        assert!(o.roots[0].abs() < 1e-12, "{:?}", o.roots);
    }

    #[test]
    fn roots_of_random_flows_make_npv_zero_and_match_the_recursive_search() {
        let mut state = 12;
        for case in 0..300 {
            let n = 3 + case % 60;
            let cents: Vec<i64> = (0..n).map(|_| (lcg(&mut state) % 2_000_001) as i64 - 1_000_000).collect();
            let poly = DensePoly::from_flows(&flows(&cents)).unwrap();
            let found = all_roots(&poly).unwrap();
            let reference = recursive_roots(&poly);
            assert_eq!(found.len(), reference.len(), "{cents:?}");
            for (f, r) in found.iter().zip(&reference) {
                assert!((f.s - r.s).abs() <= 1e-12 * r.s.max(1e-3), "{cents:?}: {} vs {}", f.s, r.s);
                assert_eq!(f.rising, r.rising, "{cents:?}");
            }
            let values: Vec<f64> = cents.iter().map(|&c| c as f64).collect();
            for f in &found {
                let rate = rate_from_s(f.s);
                assert!(relative_npv(rate, &values) < 1e-9, "{cents:?}: NPV at {rate}");
            }
        }
    }

    #[test]
    fn roots_of_2400_random_sign_flows_make_npv_zero() {
        let mut state = 7;
        let cents: Vec<i64> = (0..2400).map(|_| (lcg(&mut state) % 2_000_001) as i64 - 1_000_000).collect();
        let o = irr(&flows(&cents)).unwrap();
        assert!(!o.roots.is_empty());
        let values: Vec<f64> = cents.iter().map(|&c| c as f64).collect();
        for &r in &o.roots {
            assert!(relative_npv(r, &values) < 1e-9, "NPV at {r}");
        }
    }

    #[test]
    fn six_thousand_alternating_dated_flows_answer() {
        // The same alternating flows 30 days apart (XIRR shares this search): the one root is
        // again a rate of 0, where the 6,000 flows cancel.
        let alternating: Vec<i64> = (0..6000).map(|t| if t % 2 == 0 { -1 } else { 1 }).collect();
        let start = time::macros::date!(2000 - 01 - 01);
        let dates: Vec<time::Date> = (0..6000).map(|t| start + time::Duration::days(30 * t)).collect();
        let o = crate::finance::xirr_outcome(&flows(&alternating), &dates).unwrap();
        assert!(o.ambiguous);
        assert_eq!(o.roots.len(), 1);
        assert!(o.roots[0].abs() < 1e-12, "{:?}", o.roots);
    }
}

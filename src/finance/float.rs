//! f64 versions of NPV and IRR for batch work (screening thousands of series at once), where
//! `Decimal`'s exactness buys nothing: every figure a page or report shows comes from the
//! `Decimal` functions ([`super::npv`], [`super::irr`]); these agree with them to about 1e-12
//! relative (see the tests).

use rayon::prelude::*;

use super::irr::{DensePoly, outcome_of, sign_changes, signum};
use super::rate::check_rate;
use super::{FinanceError, IrrOutcome};

/// Independent Horner chains: enough to hide the latency of a multiply-add and let the
/// compiler use SIMD lanes.
const LANES: usize = 8;

/// NPV of evenly spaced f64 flows, the first undiscounted: `sum_t CF_t / (1 + rate)^t`.
///
/// Evaluated as [`LANES`] interleaved Horner chains in `v^LANES` (`v = 1 / (1 + rate)`), flow
/// `t` in chain `t mod LANES`, combined at the end by one short Horner in `v`: the same sum,
/// one multiply-add per flow, without one long dependency chain.
///
/// # Errors
/// [`FinanceError::EmptyFlows`], [`FinanceError::RateOutOfRange`], and
/// [`FinanceError::NotRepresentable`] for a non-finite flow or result.
///
/// # Example
/// ```
/// use pilot_ledger::finance::float::npv_f64;
/// // numpy-financial's npv documentation example: npf.npv(0.281, [-100, 39, 59, 55, 20]) = -0.0085
/// // (rounded to 4 places).
/// let v = npv_f64(0.281, &[-100.0, 39.0, 59.0, 55.0, 20.0])?;
/// assert!((v - -0.0085).abs() < 5e-5);
/// # Ok::<(), pilot_ledger::finance::FinanceError>(())
/// ```
pub fn npv_f64(rate: f64, flows: &[f64]) -> Result<f64, FinanceError> {
    if flows.is_empty() {
        return Err(FinanceError::EmptyFlows);
    }
    check_rate(rate)?;
    let v = 1.0 / (1.0 + rate);
    let step = v.powi(LANES as i32);
    let chunks = flows.chunks_exact(LANES);
    // The partial last chunk is the highest power of `step`: it starts the chains.
    let mut acc = [0.0; LANES];
    for (a, cf) in acc.iter_mut().zip(chunks.remainder()) {
        *a = *cf;
    }
    for chunk in chunks.rev() {
        for k in 0..LANES {
            acc[k] = acc[k] * step + chunk[k];
        }
    }
    let total = acc.iter().rev().fold(0.0, |sum, a| sum * v + a);
    if total.is_finite() { Ok(total) } else { Err(FinanceError::NotRepresentable) }
}

/// [`npv_f64`] of many series of one length at one rate: `flows` holds them row after row
/// (`width` flows each, the layout of a matrix product's left operand); results in row order.
///
/// The discount factors `v^t` are computed once for the batch, and each row is a dot product
/// with them in [`DOT_LANES`] independent partial sums (the vectorized form of the same sum;
/// agrees with [`npv_f64`] to rounding). The rows are cut into one block per core (at least
/// [`MIN_BLOCK_ROWS`] rows each): the work is bound by memory bandwidth, so fewer, larger
/// tasks are faster than many small ones.
///
/// # Errors
/// [`FinanceError::RateOutOfRange`]; [`FinanceError::EmptyFlows`] when `width` is 0 or does
/// not divide the flows; [`FinanceError::NotRepresentable`] when a result overflows.
pub fn npv_batch(rate: f64, flows: &[f64], width: usize) -> Result<Vec<f64>, FinanceError> {
    check_rate(rate)?;
    if width == 0 || !flows.len().is_multiple_of(width) {
        return Err(FinanceError::EmptyFlows);
    }
    let v = 1.0 / (1.0 + rate);
    let discount: Vec<f64> = (0..width).map(|t| v.powi(i32::try_from(t).unwrap_or(i32::MAX))).collect();
    let mut out = vec![0.0; flows.len() / width];
    let block = out.len().div_ceil(rayon::current_num_threads()).max(MIN_BLOCK_ROWS);
    out.par_chunks_mut(block).zip(flows.par_chunks(block * width)).for_each(|(out, rows)| {
        for (o, row) in out.iter_mut().zip(rows.chunks_exact(width)) {
            *o = dot(row, &discount);
        }
    });
    if out.iter().all(|x| x.is_finite()) { Ok(out) } else { Err(FinanceError::NotRepresentable) }
}

/// Fewest rows per parallel task of [`npv_batch`]: below this a task costs more to hand off.
const MIN_BLOCK_ROWS: usize = 1024;

/// Partial sums of [`npv_batch`]'s dot products.
const DOT_LANES: usize = 16;

fn dot(a: &[f64], b: &[f64]) -> f64 {
    let mut acc = [0.0; DOT_LANES];
    let (ca, cb) = (a.chunks_exact(DOT_LANES), b.chunks_exact(DOT_LANES));
    let tail: f64 = ca.remainder().iter().zip(cb.remainder()).map(|(x, y)| x * y).sum();
    for (x, y) in ca.zip(cb) {
        for k in 0..DOT_LANES {
            acc[k] += x[k] * y[k];
        }
    }
    acc.iter().sum::<f64>() + tail
}

/// IRR of f64 flows with the method, rules and outcome of [`super::irr`].
///
/// # Errors
/// As [`super::irr`].
pub fn irr_f64(flows: &[f64]) -> Result<IrrOutcome, FinanceError> {
    if flows.is_empty() {
        return Err(FinanceError::EmptyFlows);
    }
    if flows.iter().any(|f| !f.is_finite()) {
        return Err(FinanceError::NotRepresentable);
    }
    let changes = sign_changes(flows.iter().map(|&f| signum(f)));
    if changes == 0 {
        return Err(FinanceError::NoSignChange);
    }
    outcome_of(&DensePoly::normalized(flows.to_vec()), changes)
}

#[cfg(test)]
mod tests {
    #![expect(clippy::unwrap_used)]
    use super::*;
    use crate::finance::{irr, npv};
    use proptest::prelude::*;
    use rust_decimal::Decimal;
    use rust_decimal::prelude::{FromPrimitive, ToPrimitive};

    proptest! {
        // The f64 paths agree with the Decimal functions the pages use.
        #[test]
        fn agrees_with_the_decimal_functions(
            flows in prop::collection::vec(-1.0e6f64..1.0e6, 2..130), rate in 0.0f64..0.5,
        ) {
            let dec: Vec<Decimal> = flows.iter().map(|f| Decimal::from_f64(*f).unwrap()).collect();
            let exact = npv(rate, &dec).unwrap().to_f64().unwrap();
            let scale: f64 = flows.iter().map(|f| f.abs()).sum::<f64>().max(1.0);
            prop_assert!((npv_f64(rate, &flows).unwrap() - exact).abs() <= 1e-12 * scale);
            match (irr(&dec), irr_f64(&flows)) {
                (Ok(a), Ok(b)) => {
                    prop_assert_eq!(a.roots.len(), b.roots.len());
                    for (x, y) in a.roots.iter().zip(&b.roots) {
                        prop_assert!((x - y).abs() <= 1e-9 * x.abs().max(1.0));
                    }
                }
                (Err(a), Err(b)) => prop_assert_eq!(a, b),
                (a, b) => prop_assert!(false, "{a:?} vs {b:?}"),
            }
        }
    }

    #[test]
    fn batch_keeps_order_and_reports_errors() {
        let rows = [-100.0, 110.0, 0.0, -100.0, 0.0, 121.0];
        let v = npv_batch(0.1, &rows, 3).unwrap();
        assert!(v[0].abs() < 1e-12 && v[1].abs() < 1e-12);
        // 5,000 rows: more than one parallel block, each row still in its place.
        let many: Vec<f64> = (0..5_000).flat_map(|i| [-(i as f64), 1.1 * i as f64]).collect();
        let v = npv_batch(0.1, &many, 2).unwrap();
        assert!(v.iter().all(|x| x.abs() < 1e-9));
        assert_eq!(npv_batch(0.1, &[], 0), Err(FinanceError::EmptyFlows));
        assert_eq!(npv_batch(0.1, &[1.0, 2.0, 3.0], 2), Err(FinanceError::EmptyFlows));
        assert!(npv_f64(-1.0, &[1.0]).is_err());
        assert_eq!(irr_f64(&[1.0, 2.0]).unwrap_err(), FinanceError::NoSignChange);
    }
}

//! A case version's figures: schedule and metrics at the site's hurdle rate, pre-tax and (when
//! the site has a tax rate) after tax.

use super::CaseHeader;
use super::{NewBenefitDriver, NewCostItem, SiteSettings, finance_input};
use crate::finance::FinanceError;
use crate::finance::schedule::{CaseMetrics, Schedule, TaxInput, build_schedule, case_metrics};

/// Schedule and metrics of one view (pre-tax or after-tax).
#[derive(Debug, Clone)]
pub struct View {
    /// The monthly schedule.
    pub schedule: Schedule,
    /// Its metrics.
    pub metrics: CaseMetrics,
}

/// Everything the case pages show.
#[derive(Debug, Clone)]
pub struct CaseFigures {
    /// Pre-tax view.
    pub pre_tax: View,
    /// After-tax view, when the site sets a tax rate.
    pub after_tax: Option<View>,
}

/// Compute a case's figures at the site's hurdle rate.
pub fn case_figures<'a>(
    header: &CaseHeader,
    costs: impl IntoIterator<Item = &'a NewCostItem> + Clone,
    drivers: impl IntoIterator<Item = &'a NewBenefitDriver> + Clone,
    site: &SiteSettings,
) -> Result<CaseFigures, FinanceError> {
    let hurdle = site.hurdle_f64();
    let view = |tax: Option<TaxInput>| -> Result<View, FinanceError> {
        let input = finance_input(header, costs.clone(), drivers.clone(), tax);
        let schedule = build_schedule(&input, hurdle)?;
        let metrics = case_metrics(&schedule);
        Ok(View { schedule, metrics })
    };
    let pre_tax = view(None)?;
    let after_tax = match (site.tax_rate, site.depreciation_years) {
        (Some(rate), years) => Some(view(Some(TaxInput { rate, depreciation_years: years.unwrap_or(5) }))?),
        (None, _) => None,
    };
    Ok(CaseFigures { pre_tax, after_tax })
}

//! Sample-size checks for a prediction model of a two-class outcome: events per predictor
//! and Riley et al. (BMJ 2020;368:m441) criterion for estimating the overall risk precisely.

use crate::error::Result;

use super::bad;

/// Events per candidate predictor parameter: the number of rows in the smaller class divided
/// by the number of predictor parameters (a category with k levels counts k − 1). Below 10 is
/// the classic warning (Peduzzi et al., J Clin Epidemiol 1996;49:1373–1379, from memory).
pub fn events_per_predictor(events: u64, non_events: u64, parameters: usize) -> Result<f64> {
    if parameters == 0 {
        return Err(bad(
            "events per predictor",
            "there are no predictor parameters",
        ));
    }
    Ok(events.min(non_events) as f64 / parameters as f64)
}

/// Rows needed to estimate an overall risk `prevalence` within ± `margin` (95% confidence):
/// n = (1.96 / margin)² · φ(1 − φ), rounded up (Riley et al. 2020, criterion (i), with
/// margin 0.05 in their worked example).
pub fn rows_for_overall_risk(prevalence: f64, margin: f64) -> Result<u64> {
    const WHAT: &str = "the sample size for the overall risk";
    if !(prevalence > 0.0 && prevalence < 1.0) {
        return Err(bad(
            WHAT,
            format!("the prevalence {prevalence} is not strictly between 0 and 1"),
        ));
    }
    if !(margin > 0.0 && margin < 1.0) {
        return Err(bad(
            WHAT,
            format!("the margin {margin} is not strictly between 0 and 1; 0.05 is usual"),
        ));
    }
    Ok(((1.96 / margin).powi(2) * prevalence * (1.0 - prevalence) - 1e-9).ceil() as u64)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn riley_worked_values() {
        // Riley et al., BMJ 2020;368:m441: 385 for φ = 0.5 and 246 for φ = 0.2 at margin 0.05
        // (references.md, recomputed).
        assert_eq!(rows_for_overall_risk(0.5, 0.05).unwrap(), 385);
        assert_eq!(rows_for_overall_risk(0.2, 0.05).unwrap(), 246);
        assert!(rows_for_overall_risk(0.0, 0.05).is_err());
        assert!(rows_for_overall_risk(0.5, f64::NAN).is_err());
        assert_eq!(events_per_predictor(40, 500, 8).unwrap(), 5.0);
        assert!(events_per_predictor(40, 500, 0).is_err());
    }
}

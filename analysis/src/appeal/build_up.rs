//! The value built up from a reference home, one model term at a time
//! (module documentation of [`super`]).

use super::inputs::{ModelRows, ModelledParcel};
use crate::error::Result;
use serde::{Deserialize, Serialize};

/// The home the value is built up from.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct ReferenceHome {
    /// Which home: a parcel id, or "the typical home".
    pub name: String,
    /// Its model value as of the valuation date (currency).
    pub value: f64,
}

/// One term's step from the reference home towards the parcel.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct BuildUpStep {
    /// The model term, as the fit names it.
    pub term: String,
    /// What the term measures, in plain words (`living area`, `distance from Lantern Green`).
    pub characteristic: String,
    /// The parcel's inputs to the term (`column = value`).
    pub parcel: String,
    /// The reference home's inputs to the term.
    pub reference: String,
    /// `Δₜ`: the term's move in the model's units (log price for a logged target).
    pub model_move: f64,
    /// For a logged target, the factor `exp(Δₜ)` the running value is multiplied by.
    pub factor: Option<f64>,
    /// The change of the running value, currency.
    pub amount: f64,
    /// The running value after this step, currency.
    pub running_value: f64,
}

/// The parcel's value as the reference home's value plus one amount per term.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct BuildUp {
    /// The starting point.
    pub reference: ReferenceHome,
    /// One step per model term, in the model's term order; the last running
    /// value is the parcel's value (to rounding).
    pub steps: Vec<BuildUpStep>,
}

/// Moves `start` by each of `moves` in turn: multiplying by `exp(Δ)` when
/// `multiplicative`, else adding `Δ`. Returns `(amount, factor, running)`
/// per move; the amounts sum to the last running value minus `start`.
pub(super) fn step_through(start: f64, moves: &[f64], multiplicative: bool) -> Vec<(f64, Option<f64>, f64)> {
    let mut running = start;
    moves
        .iter()
        .map(|&delta| {
            let (next, factor) =
                if multiplicative { (running * delta.exp(), Some(delta.exp())) } else { (running + delta, None) };
            let amount = next - running;
            running = next;
            (amount, factor, running)
        })
        .collect()
}

/// The build-up of `subject` from `reference`.
pub(super) fn build_up(model: &ModelRows<'_>, reference: &ModelledParcel, subject: &ModelledParcel) -> Result<BuildUp> {
    let moves = model.term_moves(&subject.x, &reference.x);
    let steps = step_through(reference.value, &moves, model.multiplicative)
        .into_iter()
        .zip(&model.terms)
        .enumerate()
        .map(|(t, ((amount, factor, running_value), term))| BuildUpStep {
            term: term.label.clone(),
            // Both homes are valued as of the same date, so the time trend moves nothing here.
            characteristic: if term.is_time { "date of the value".to_string() } else { term.characteristic() },
            parcel: subject.inputs[t].clone(),
            reference: reference.inputs[t].clone(),
            model_move: moves[t],
            factor,
            amount,
            running_value,
        })
        .collect();
    Ok(BuildUp { reference: ReferenceHome { name: reference.id.clone(), value: reference.value }, steps })
}

#[cfg(test)]
mod tests {
    use super::step_through;

    #[test]
    fn steps_multiply_or_add_and_their_amounts_sum_to_the_change() {
        let moves = [0.1, -0.25, 0.02];
        let steps = step_through(200_000.0, &moves, true);
        let end = 200_000.0 * (0.1f64 - 0.25 + 0.02).exp();
        assert!((steps[2].2 - end).abs() < 1e-8);
        let total: f64 = steps.iter().map(|s| s.0).sum();
        assert!((total - (end - 200_000.0)).abs() < 1e-8);
        let added = step_through(100.0, &moves, false);
        for (step, expected) in added.iter().zip([100.1, 99.85, 99.87]) {
            assert!((step.2 - expected).abs() < 1e-12 && step.1.is_none());
        }
    }
}

//! The rounds of a fit as DataFusion aggregate functions.
//!
//! Each function is called as `f(plan, [group,] numbers…, labels…)`, where
//! `plan` is the constant round plan ([`crate::plan`]). An accumulator takes
//! in its partition's batches (coding them with the analysis crate exactly as
//! a fit in batches does) and gives its state as bytes
//! ([`plumbline::state_bytes`]): a status byte, then the batches' pieces (a
//! partial state) or their merge (the final value).
//!
//! **Fixed merge order.** Which batches a partition reads, and the order in
//! which partitions finish, change from run to run (file listing is
//! concurrent; executors finish when they finish). Merging floating-point
//! numbers in another order changes the last bits. So an accumulator keeps
//! one piece per batch — each batch's own state, which depends only on the
//! file it came from — and the final accumulator merges every piece sorted
//! by its bytes: the same files give the same answer, bit for bit, on any
//! number of partitions or machines. (A piece is `O(p²)` numbers; 2·10⁸ rows
//! in batches of [`crate::driver::BATCH_ROWS`] make about 6 MB of factor
//! pieces at p = 20.)
//!
//! **A group that fails stops alone.** A refusal (an unknown level, a value
//! that is not finite, …) becomes the group's state, carried to the driver,
//! while the other groups go on.

use crate::error::{EngineError, Result};
use crate::frames::frame_of;
use crate::plan::{from_hex, Round, RoundPlan, WHOLE_DATA};
use datafusion::arrow::array::{Array, ArrayRef, AsArray};
use datafusion::arrow::datatypes::{DataType, Field, FieldRef};
use datafusion::common::{DataFusionError, ScalarValue};
use datafusion::logical_expr::function::{AccumulatorArgs, StateFieldsArgs};
use datafusion::logical_expr::{Accumulator, AggregateUDF, AggregateUDFImpl, Signature, Volatility};
use datafusion::physical_expr::expressions::Literal;
use plumbline::fit::streamed::{FactorAggregate, FirstSolution, ResidualAggregate};
use plumbline::model::design::RecipeLearner;
use plumbline::model::DesignRecipe;
use plumbline::numeric::tsqr::merge_pairwise;
use std::sync::Arc;

/// The three functions, to register on a session (and on every executor).
pub fn round_functions() -> Vec<AggregateUDF> {
    [Round::Coding, Round::Factor, Round::Residuals]
        .into_iter()
        .map(|r| AggregateUDF::from(RoundFunction::new(r)))
        .collect()
}

/// The settings variable that makes every batch take this many milliseconds
/// longer (fault drills: a job slow enough to lose an executor in).
pub const SLOW_BATCH_VARIABLE: &str = "PLUMBLINE_ENGINE_SLOW_BATCH_MS";

/// One round's aggregate function.
#[derive(Debug, PartialEq, Eq, Hash)]
pub struct RoundFunction {
    round: Round,
    signature: Signature,
}

impl RoundFunction {
    /// The function of `round`.
    pub fn new(round: Round) -> Self {
        Self { round, signature: Signature::variadic_any(Volatility::Immutable) }
    }
}

impl AggregateUDFImpl for RoundFunction {
    fn name(&self) -> &str {
        self.round.function_name()
    }

    fn signature(&self) -> &Signature {
        &self.signature
    }

    fn return_type(&self, _arg_types: &[DataType]) -> datafusion::error::Result<DataType> {
        Ok(DataType::Binary)
    }

    fn accumulator(&self, args: AccumulatorArgs) -> datafusion::error::Result<Box<dyn Accumulator>> {
        let plan = plan_of(args.exprs.first().map(|e| e.downcast_ref::<Literal>()))?;
        if plan.round != self.round {
            return Err(DataFusionError::Plan(format!(
                "{} was given the plan of the {:?} round",
                self.round.function_name(),
                plan.round
            )));
        }
        let slow = std::env::var(SLOW_BATCH_VARIABLE).ok().and_then(|v| v.parse::<u64>().ok()).unwrap_or(0);
        Ok(Box::new(RoundAccumulator::new(plan, slow)))
    }

    fn state_fields(&self, _args: StateFieldsArgs) -> datafusion::error::Result<Vec<FieldRef>> {
        Ok(vec![Arc::new(Field::new("piece", DataType::Binary, true))])
    }
}

/// Reads the plan from the function's first argument, which must be a constant.
fn plan_of(literal: Option<Option<&Literal>>) -> datafusion::error::Result<RoundPlan> {
    let refuse = || {
        DataFusionError::Plan(
            "the first argument of a Plumbline round function must be its round plan, a constant text".into(),
        )
    };
    let text = match literal.flatten().ok_or_else(refuse)?.value() {
        ScalarValue::Utf8(Some(text)) | ScalarValue::LargeUtf8(Some(text)) | ScalarValue::Utf8View(Some(text)) => {
            text.clone()
        }
        ScalarValue::Dictionary(_, value) => match value.as_ref() {
            ScalarValue::Utf8(Some(text)) => text.clone(),
            _ => return Err(refuse()),
        },
        _ => return Err(refuse()),
    };
    RoundPlan::from_text(&text).map_err(|e| DataFusionError::Plan(e.to_string()))
}

/// What an accumulator's group needs to make a batch's piece.
enum Setup {
    /// Not known until the first batch names the group.
    Unknown,
    /// Learning the coding.
    Coding,
    /// Factoring, with the group's recipe (learning the coding too when the
    /// plan says so).
    Factor { recipe: Box<DesignRecipe>, extended: bool },
    /// Gathering residual sums, given the first solution.
    Residuals { recipe: Box<DesignRecipe>, first: Box<FirstSolution> },
    /// A group this round does not fit (it failed an earlier round, or has
    /// no group label).
    Skipped,
}

/// The state bytes' status byte.
const EMPTY: u8 = 0;
const HELD: u8 = 1;
const FAILED: u8 = 2;
const PIECES: u8 = 3;

/// One group's accumulator in one partition (or the final merge).
struct RoundAccumulator {
    plan: Arc<RoundPlan>,
    setup: Setup,
    /// This accumulator's batches' pieces (round state bytes).
    pieces: Vec<Vec<u8>>,
    /// Pieces received from partial states (final accumulators).
    received: Vec<Vec<u8>>,
    /// Why the group's rows were refused, if they were.
    failed: Option<String>,
    /// Milliseconds to wait per batch ([`SLOW_BATCH_VARIABLE`]).
    slow: u64,
}

impl std::fmt::Debug for RoundAccumulator {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RoundAccumulator").field("round", &self.plan.round).finish_non_exhaustive()
    }
}

impl RoundAccumulator {
    fn new(plan: RoundPlan, slow: u64) -> Self {
        Self {
            plan: Arc::new(plan),
            setup: Setup::Unknown,
            pieces: Vec::new(),
            received: Vec::new(),
            failed: None,
            slow,
        }
    }

    /// What the group `label` needs, before its first rows.
    fn start(&self, label: &str) -> std::result::Result<Setup, String> {
        let plan = &self.plan;
        let recipe = || -> std::result::Result<Option<DesignRecipe>, String> {
            let Some(hex) = plan.codings.get(label) else { return Ok(None) };
            let bytes = from_hex(hex).ok_or("the plan's coding state is not hex")?;
            let learner = RecipeLearner::from_bytes(&bytes, &plan.spec).map_err(|e| e.to_string())?;
            learner.finish().map(Some).map_err(|e| e.to_string())
        };
        Ok(match plan.round {
            Round::Coding => Setup::Coding,
            Round::Factor if plan.learning => {
                let learner = RecipeLearner::new(&plan.spec).map_err(|e| e.to_string())?;
                let recipe = learner.recipe_before_rows().ok_or(
                    "the round plan asks round one to learn the coding of a model whose coding needs levels first",
                )?;
                Setup::Factor { recipe: Box::new(recipe), extended: plan.extended.contains(label) }
            }
            Round::Factor => match recipe()? {
                Some(recipe) => Setup::Factor { recipe: Box::new(recipe), extended: plan.extended.contains(label) },
                None => Setup::Skipped,
            },
            Round::Residuals => match (recipe()?, plan.factors.get(label)) {
                (Some(recipe), Some(hex)) => {
                    let bytes = from_hex(hex).ok_or("the plan's factor state is not hex")?;
                    let factor = FactorAggregate::from_bytes(&bytes).map_err(|e| e.to_string())?;
                    let first = FirstSolution::from_aggregate(factor, &recipe, plan.rank_tolerance)
                        .map_err(|e| e.to_string())?;
                    Setup::Residuals { recipe: Box::new(recipe), first: Box::new(first) }
                }
                _ => Setup::Skipped,
            },
        })
    }

    /// Takes in one batch's rows of this group as one more piece.
    fn absorb(&mut self, values: &[ArrayRef]) -> std::result::Result<(), String> {
        let plan = Arc::clone(&self.plan);
        let data = &values[1..];
        if data.len() != plan.data_arguments() {
            return Err(format!(
                "{} was given {} columns after its plan; the plan names {}",
                plan.round.function_name(),
                data.len(),
                plan.data_arguments()
            ));
        }
        let (label, columns) = if plan.grouped {
            let groups = data[0].as_string_opt::<i32>().ok_or("the group column must reach the function as text")?;
            match (0..groups.len()).find(|&i| groups.is_valid(i)) {
                Some(i) => (groups.value(i).to_string(), &data[1..]),
                None => {
                    self.setup = Setup::Skipped;
                    return Ok(());
                }
            }
        } else {
            (WHOLE_DATA.to_string(), data)
        };
        if matches!(self.setup, Setup::Unknown) {
            self.setup = self.start(&label)?;
        }
        let frame = match self.setup {
            Setup::Skipped | Setup::Unknown => return Ok(()),
            _ => frame_of(&plan, columns).map_err(|e| e.to_string())?,
        };
        let refused = |e: plumbline::Error| without_batch_rows(&e);
        let piece = match &self.setup {
            Setup::Coding => {
                let mut learner = RecipeLearner::new(&plan.spec).map_err(refused)?;
                learner.absorb(&frame).map_err(refused)?;
                learner.to_bytes()
            }
            Setup::Factor { recipe, extended } => {
                let mut learner =
                    if plan.learning { Some(RecipeLearner::new(&plan.spec).map_err(refused)?) } else { None };
                let design = match &mut learner {
                    Some(learner) => learner.absorb_into_design(recipe, &frame),
                    None => recipe.fitting_design(&frame),
                }
                .map_err(refused)?;
                let columns = recipe.column_names.len();
                let mut factor =
                    if *extended { FactorAggregate::new_extended(columns) } else { FactorAggregate::new(columns) };
                factor.absorb_on(&design, 1);
                match learner {
                    Some(learner) => join_learning_piece(&learner.to_bytes(), &factor.to_bytes()),
                    None => factor.to_bytes(),
                }
            }
            Setup::Residuals { recipe, first } => {
                let design = recipe.fitting_design(&frame).map_err(refused)?;
                let mut sums = ResidualAggregate::new(first, plan.robust);
                sums.absorb(&design, first);
                sums.to_bytes()
            }
            Setup::Skipped | Setup::Unknown => return Ok(()),
        };
        self.pieces.push(piece);
        Ok(())
    }

    /// The partial state: every piece held or received, or the refusal.
    fn partial_state(&self) -> Vec<u8> {
        if let Some(reason) = &self.failed {
            return with_status(FAILED, reason.as_bytes());
        }
        let mut bytes = vec![PIECES];
        for piece in self.pieces.iter().chain(&self.received) {
            bytes.extend_from_slice(&(piece.len() as u64).to_le_bytes());
            bytes.extend_from_slice(piece);
        }
        bytes
    }

    /// The final value: every piece merged in the order of their bytes.
    fn final_state(&self) -> std::result::Result<Vec<u8>, String> {
        if let Some(reason) = &self.failed {
            return Ok(with_status(FAILED, reason.as_bytes()));
        }
        let mut pieces: Vec<&[u8]> = self.pieces.iter().chain(&self.received).map(Vec::as_slice).collect();
        if pieces.is_empty() {
            return Ok(vec![EMPTY]);
        }
        pieces.sort_unstable();
        let body = merge_pieces(&self.plan, &pieces)?;
        let mut bytes = with_status(HELD, &(pieces.len() as u64).to_le_bytes());
        bytes.extend_from_slice(&body);
        Ok(bytes)
    }

    /// Takes in a partial state from another partition.
    fn receive(&mut self, state: &[u8]) -> std::result::Result<(), String> {
        let damaged = || "a partition's state is damaged".to_string();
        match state.split_first() {
            Some((&FAILED, reason)) => {
                // Of several refusals, keep the same one whatever the order.
                let reason = String::from_utf8_lossy(reason).into_owned();
                if self.failed.as_ref().is_none_or(|held| reason < *held) {
                    self.failed = Some(reason);
                }
            }
            Some((&PIECES, mut rest)) => {
                while !rest.is_empty() {
                    let (length, tail) = rest.split_at_checked(8).ok_or_else(damaged)?;
                    let length = usize::try_from(u64::from_le_bytes(length.try_into().map_err(|_| damaged())?))
                        .map_err(|_| damaged())?;
                    let (piece, tail) = tail.split_at_checked(length).ok_or_else(damaged)?;
                    self.received.push(piece.to_vec());
                    rest = tail;
                }
            }
            Some((&EMPTY, [])) => {}
            _ => return Err(damaged()),
        }
        Ok(())
    }
}

fn with_status(status: u8, body: &[u8]) -> Vec<u8> {
    let mut bytes = Vec::with_capacity(1 + body.len());
    bytes.push(status);
    bytes.extend_from_slice(body);
    bytes
}

/// What a final value says about its group.
pub enum GroupState<'a> {
    /// No rows reached the round.
    Empty,
    /// The round's merged state.
    Held {
        /// Batches merged.
        pieces: u64,
        /// The round's state ([`plumbline::state_bytes`]).
        body: &'a [u8],
    },
    /// The group's rows were refused: why.
    Failed(String),
}

/// Reads a final value.
pub fn read_state(bytes: &[u8]) -> Result<GroupState<'_>> {
    let damaged = || EngineError::Data("a round's result is damaged".into());
    Ok(match bytes.split_first() {
        Some((&EMPTY, [])) | None => GroupState::Empty,
        Some((&FAILED, reason)) => GroupState::Failed(String::from_utf8_lossy(reason).into_owned()),
        Some((&HELD, rest)) => {
            let (count, body) = rest.split_at_checked(8).ok_or_else(damaged)?;
            GroupState::Held { pieces: u64::from_le_bytes(count.try_into().map_err(|_| damaged())?), body }
        }
        _ => return Err(damaged()),
    })
}

/// A piece (or merged state) of a round one that learns the coding: the
/// learner's state, length first, then the factor's.
pub fn join_learning_piece(coding: &[u8], factor: &[u8]) -> Vec<u8> {
    let mut bytes = Vec::with_capacity(8 + coding.len() + factor.len());
    bytes.extend_from_slice(&(coding.len() as u64).to_le_bytes());
    bytes.extend_from_slice(coding);
    bytes.extend_from_slice(factor);
    bytes
}

/// The learner's and the factor's states of [`join_learning_piece`]'s bytes;
/// `None` if they are cut short.
pub fn split_learning_piece(bytes: &[u8]) -> Option<(&[u8], &[u8])> {
    let (length, rest) = bytes.split_at_checked(8)?;
    let length = usize::try_from(u64::from_le_bytes(length.try_into().ok()?)).ok()?;
    rest.split_at_checked(length)
}

/// Merges one group's pieces in the order given (factors in a binary tree,
/// the TSQR reduction; sums and codings in sequence).
fn merge_pieces(plan: &RoundPlan, pieces: &[&[u8]]) -> std::result::Result<Vec<u8>, String> {
    let text = |e: plumbline::Error| e.to_string();
    Ok(match plan.round {
        Round::Coding => {
            let mut merged = RecipeLearner::new(&plan.spec).map_err(text)?;
            for piece in pieces {
                merged.merge(&RecipeLearner::from_bytes(piece, &plan.spec).map_err(text)?);
            }
            merged.to_bytes()
        }
        Round::Factor => {
            let mut learner = plan.learning.then(|| RecipeLearner::new(&plan.spec)).transpose().map_err(text)?;
            let mut factors = Vec::with_capacity(pieces.len());
            for piece in pieces {
                let factor = match &mut learner {
                    Some(learner) => {
                        let (coding, factor) = split_learning_piece(piece).ok_or("a round-one piece is damaged")?;
                        learner.merge(&RecipeLearner::from_bytes(coding, &plan.spec).map_err(text)?);
                        factor
                    }
                    None => piece,
                };
                let factor = FactorAggregate::from_bytes(factor).map_err(text)?;
                if let Some(first) = factors.first() {
                    FactorAggregate::check_mergeable(first, &factor).map_err(text)?;
                }
                factors.push(factor);
            }
            let factor =
                merge_pairwise(factors, |left, right| left.merge(&right)).map(|f| f.to_bytes()).unwrap_or_default();
            match learner {
                Some(learner) => join_learning_piece(&learner.to_bytes(), &factor),
                None => factor,
            }
        }
        Round::Residuals => {
            let mut merged: Option<ResidualAggregate> = None;
            for piece in pieces {
                let next = ResidualAggregate::from_bytes(piece).map_err(text)?;
                merged = Some(match merged {
                    Some(sums) => {
                        sums.check_mergeable(&next).map_err(text)?;
                        sums.merge(&next)
                    }
                    None => next,
                });
            }
            merged.map(|s| s.to_bytes()).unwrap_or_default()
        }
    })
}

/// A refusal's words without the row number inside a batch, which would
/// mislead (it counts from the batch's first row, not the file's).
fn without_batch_rows(error: &plumbline::Error) -> String {
    match error {
        plumbline::Error::NonFinite { column, value, .. } => format!(
            "`{column}` holds a value that is not a finite number ({value}); fix the source, or read such values \
             as missing (--non-finite missing)"
        ),
        other => other.to_string(),
    }
}

impl Accumulator for RoundAccumulator {
    fn update_batch(&mut self, values: &[ArrayRef]) -> datafusion::error::Result<()> {
        if values.first().is_none_or(|a| a.is_empty()) || self.failed.is_some() || matches!(self.setup, Setup::Skipped)
        {
            return Ok(());
        }
        if self.slow > 0 {
            std::thread::sleep(std::time::Duration::from_millis(self.slow));
        }
        if let Err(reason) = self.absorb(values) {
            self.failed = Some(reason);
            self.pieces.clear();
        }
        Ok(())
    }

    fn state(&mut self) -> datafusion::error::Result<Vec<ScalarValue>> {
        Ok(vec![ScalarValue::Binary(Some(self.partial_state()))])
    }

    fn merge_batch(&mut self, states: &[ArrayRef]) -> datafusion::error::Result<()> {
        let Some(array) = states.first() else { return Ok(()) };
        let binary = array
            .as_binary_opt::<i32>()
            .ok_or_else(|| DataFusionError::Internal("a Plumbline state arrived as another type".into()))?;
        for i in 0..binary.len() {
            if binary.is_valid(i) {
                self.receive(binary.value(i)).map_err(DataFusionError::Execution)?;
            }
        }
        Ok(())
    }

    fn evaluate(&mut self) -> datafusion::error::Result<ScalarValue> {
        Ok(ScalarValue::Binary(Some(self.final_state().map_err(DataFusionError::Execution)?)))
    }

    fn size(&self) -> usize {
        std::mem::size_of_val(self)
            + self.pieces.iter().chain(&self.received).map(|p| p.len() + std::mem::size_of::<Vec<u8>>()).sum::<usize>()
    }
}

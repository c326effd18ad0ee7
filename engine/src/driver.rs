//! Runs the rounds of a fit as queries (two passes over the rows, or three
//! when the coding needs levels first) and assembles the result.
//!
//! [`fit`] gives the same [`AssembledFit`] as a fit in batches
//! ([`plumbline::fit::fit_batches`]) and [`fit_by`] the same
//! [`StratifiedFit`] as [`plumbline::strata::fit_batches_by`]: the same
//! coding, the same rounds, the same refusals, the same provenance stamp
//! (SHA-256 of the files, computed on a thread beside the queries). Only the
//! partitioning differs, which moves results by rounding alone
//! (`engine/tests/engine.rs` checks 1e-12 against the in-memory fit).
//!
//! Each round is one aggregate query over the table of the data's files,
//! reading only the model's columns: `SELECT [group,] COUNT(*), round(plan,
//! [group,] columns…) FROM rows [WHERE group IN (…)] [GROUP BY group]`.

use crate::aggregates::{read_state, round_functions, split_learning_piece, GroupState};
use crate::error::{EngineError, Result};
use crate::plan::{to_hex, Round, RoundPlan, PLAN_FORMAT, PLAN_VERSION, WHOLE_DATA};
use datafusion::arrow::array::{Array, AsArray, RecordBatch};
use datafusion::arrow::datatypes::{DataType, Int64Type};
use datafusion::common::{Column, ScalarValue};
use datafusion::datasource::file_format::csv::CsvFormat;
use datafusion::datasource::file_format::parquet::ParquetFormat;
use datafusion::datasource::file_format::FileFormat;
use datafusion::datasource::listing::{ListingOptions, ListingTable, ListingTableConfig, ListingTableUrl};
use datafusion::functions_aggregate::expr_fn::count;
use datafusion::prelude::{cast, in_list, lit, Expr, SessionConfig, SessionContext};
use plumbline::data::{fingerprint_files, NonFinite, Provenance, RowBatches};
use plumbline::fit::solver::extended_is_cheap;
use plumbline::fit::streamed::{
    check_covariance_for_pieces, finish, FactorAggregate, FirstSolution, ResidualAggregate,
};
use plumbline::fit::{AssembledFit, CovarianceKind, FitOptions};
use plumbline::model::design::{columns_read, RecipeLearner};
use plumbline::model::{DesignRecipe, ModelSpec};
use plumbline::strata::{
    check_levels, columns_read_by_group, group_stamp, pooled_stamp, with_group_levels, StratifiedFit, Stratum,
    StratumModel, StratumOutcome,
};
use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};
use std::sync::Arc;

/// The name the data's table is registered under on a session.
pub const ROWS_TABLE: &str = "plumbline_rows";

/// Rows per batch a round function receives (DataFusion's default is 8,192).
/// Each batch becomes one piece: a frame, a design and a factor or residual
/// sums, whose fixed costs (allocations, a p x p factor, its bytes) are paid
/// per batch; at 65,536 rows they are small beside the rows' own work, and a
/// batch of 20 columns still takes only 10 MB per partition.
pub const BATCH_ROWS: usize = 65_536;

/// A session on this machine with the round functions registered, using
/// `partitions` partitions (`None`: one per core) and [`BATCH_ROWS`] rows per
/// batch.
pub fn local_context(partitions: Option<usize>) -> SessionContext {
    local_context_with_batches(partitions, BATCH_ROWS)
}

/// [`local_context`] with `batch_rows` rows per batch (each batch is one
/// piece of every round's state; tests use small batches to make many).
pub fn local_context_with_batches(partitions: Option<usize>, batch_rows: usize) -> SessionContext {
    let context = SessionContext::new_with_config(session_config(SessionConfig::new(), partitions, batch_rows));
    register_functions(&context);
    context
}

/// The settings every session of a fit needs, on top of `config`:
/// `partitions` partitions, `batch_rows` rows per batch (at least 1), and no
/// round-robin repartitioning, which deals batches to partitions in the
/// order they arrive and so would change which rows each partial state
/// holds (and the last bits of the result) from run to run. Files and byte
/// ranges of files are still split over partitions, in a fixed way.
pub fn session_config(mut config: SessionConfig, partitions: Option<usize>, batch_rows: usize) -> SessionConfig {
    if let Some(n) = partitions {
        config = config.with_target_partitions(n.max(1));
    }
    config = config.with_batch_size(batch_rows.max(1));
    config.options_mut().optimizer.enable_round_robin_repartition = false;
    config
}

/// Registers the round functions on a session.
pub fn register_functions(context: &SessionContext) {
    for function in round_functions() {
        context.register_udaf(function);
    }
}

/// The files of a fit: one file, a folder of them, or a glob, all CSV or
/// all Parquet.
#[derive(Debug, Clone)]
pub struct DataSource {
    place: PathBuf,
    files: Vec<PathBuf>,
    parquet: bool,
}

impl DataSource {
    /// The files at `place` (a `.parquet`/`.csv` file, a folder of them, or a
    /// glob such as `lake/county-*/*.parquet`), sorted by path, as a fit in
    /// batches lists them.
    pub fn open(place: &Path) -> Result<Self> {
        let text = place.to_string_lossy();
        let files = if text.contains(['*', '?', '[']) && !place.exists() {
            let mut files: Vec<PathBuf> = glob::glob(&text)
                .map_err(|e| EngineError::Data(format!("the pattern `{text}` is not a valid glob: {e}")))?
                .filter_map(|entry| entry.ok())
                .filter(|path| path.is_file())
                .collect();
            files.sort();
            if files.is_empty() {
                return Err(EngineError::Data(format!("no file matches `{text}`")));
            }
            files
        } else {
            RowBatches::open(place, &[], &[], 1)?.files().to_vec()
        };
        let is_parquet = |p: &PathBuf| {
            matches!(
                p.extension().and_then(|e| e.to_str()).map(str::to_ascii_lowercase).as_deref(),
                Some("parquet" | "pq")
            )
        };
        let parquet = files.iter().filter(|f| is_parquet(f)).count();
        if parquet != 0 && parquet != files.len() {
            return Err(EngineError::Data(format!(
                "`{text}` mixes Parquet and CSV files ({parquet} of {} are Parquet); a fit reads one format, so \
                 give a folder or pattern of one kind",
                files.len()
            )));
        }
        Ok(Self { place: place.to_path_buf(), files, parquet: parquet != 0 })
    }

    /// The files, in the order they are hashed.
    pub fn files(&self) -> &[PathBuf] {
        &self.files
    }

    /// Registers the files as [`ROWS_TABLE`] on `context`.
    pub async fn register(&self, context: &SessionContext) -> Result<()> {
        let format: Arc<dyn FileFormat> = if self.parquet {
            Arc::new(ParquetFormat::default())
        } else {
            Arc::new(CsvFormat::default().with_has_header(true))
        };
        let extension = format.get_ext();
        let urls = self
            .files
            .iter()
            .map(|file| {
                let absolute =
                    std::path::absolute(file).map_err(|e| EngineError::Data(format!("`{}`: {e}", file.display())))?;
                ListingTableUrl::parse(absolute.to_string_lossy()).map_err(EngineError::from)
            })
            .collect::<Result<Vec<_>>>()?;
        let options = ListingOptions::new(format).with_file_extension(extension);
        let config = ListingTableConfig::new_with_multi_paths(urls)
            .with_listing_options(options)
            .infer_schema(&context.state())
            .await?;
        context.deregister_table(ROWS_TABLE)?;
        context.register_table(ROWS_TABLE, Arc::new(ListingTable::try_new(config)?))?;
        Ok(())
    }
}

/// Hashes the files on a thread of its own while the queries run.
struct Fingerprint(std::thread::JoinHandle<plumbline::Result<Provenance>>);

impl Fingerprint {
    fn start(source: &DataSource, columns: usize) -> Self {
        let (place, files) = (source.place.clone(), source.files.clone());
        // Rows are not known until the first round; stamped afterwards.
        Self(std::thread::spawn(move || fingerprint_files(&place, &files, 0, columns)))
    }

    fn finish(self, rows: usize) -> Result<Provenance> {
        let mut stamp = self.0.join().map_err(|_| EngineError::Data("hashing the data files failed".into()))??;
        stamp.rows = rows;
        Ok(stamp)
    }
}

/// One round's rows: for each group label (`None`: rows without a group),
/// the rows seen and the merged state.
type RoundRows = Vec<(Option<String>, usize, Vec<u8>)>;

/// The call of one round over the table.
struct RoundQuery<'a> {
    plan: RoundPlan,
    /// The grouping column, if any.
    group: Option<&'a str>,
    /// Only the rows whose value in this column is one of these.
    only: Option<(&'a str, &'a BTreeSet<String>)>,
}

fn column(name: &str) -> Expr {
    Expr::Column(Column::new_unqualified(name))
}

impl RoundQuery<'_> {
    async fn run(self, context: &SessionContext) -> Result<RoundRows> {
        let label = |name: &str| cast(column(name), DataType::Utf8);
        let text = self.plan.to_text()?;
        // A one-value dictionary: the engine repeats keys, not the text.
        let plan = lit(ScalarValue::Dictionary(Box::new(DataType::Int32), Box::new(ScalarValue::Utf8(Some(text)))));
        let mut arguments = vec![plan];
        if let Some(group) = self.group {
            arguments.push(label(group));
        }
        arguments.extend(self.plan.numbers.iter().map(|n| cast(column(n), DataType::Float64)));
        arguments.extend(self.plan.labels.iter().map(|n| label(n)));
        let function = round_functions()
            .into_iter()
            .find(|f| f.name() == self.plan.round.function_name())
            .ok_or_else(|| EngineError::Data("a round function is missing".into()))?;
        let mut frame = context.table(ROWS_TABLE).await?;
        let group_by: Vec<Expr> = self.group.map(|g| label(g).alias("grp")).into_iter().collect();
        if let Some((column, only)) = self.only {
            frame = frame.filter(in_list(label(column), only.iter().map(|g| lit(g.as_str())).collect(), false))?;
        }
        let rows = frame
            .aggregate(group_by, vec![count(lit(1i64)).alias("rows"), function.call(arguments).alias("state")])?
            .collect()
            .await?;
        read_rounds(&rows, self.group.is_some())
    }
}

fn read_rounds(batches: &[RecordBatch], grouped: bool) -> Result<RoundRows> {
    let malformed = || EngineError::Data("a round query returned columns of unexpected types".into());
    let mut out = Vec::new();
    for batch in batches {
        let offset = usize::from(grouped);
        let groups = if grouped { Some(batch.column(0).as_string_opt::<i32>().ok_or_else(malformed)?) } else { None };
        let rows = batch.column(offset).as_primitive_opt::<Int64Type>().ok_or_else(malformed)?;
        let states = batch.column(offset + 1).as_binary_opt::<i32>().ok_or_else(malformed)?;
        for i in 0..batch.num_rows() {
            let group = match groups {
                Some(g) if g.is_valid(i) => Some(g.value(i).to_string()),
                Some(_) => None,
                None => Some(WHOLE_DATA.to_string()),
            };
            let state = if states.is_valid(i) { states.value(i).to_vec() } else { Vec::new() };
            out.push((group, usize::try_from(rows.value(i)).unwrap_or(0), state));
        }
    }
    // Groups in label order, whatever order the engine returned them in.
    out.sort_by(|a, b| a.0.cmp(&b.0));
    Ok(out)
}

/// A model's plan for the coding round.
fn coding_plan(spec: &ModelSpec, options: &FitOptions, non_finite: NonFinite, grouped: bool) -> RoundPlan {
    let (numbers, labels) = columns_read(spec);
    RoundPlan {
        format: PLAN_FORMAT.into(),
        version: PLAN_VERSION,
        round: Round::Coding,
        spec: spec.clone(),
        grouped,
        numbers,
        labels,
        non_finite,
        robust: options.covariance != CovarianceKind::Classical,
        rank_tolerance: options.rank_tolerance,
        learning: false,
        extended: BTreeSet::new(),
        codings: BTreeMap::new(),
        factors: BTreeMap::new(),
    }
}

/// Where one model (the whole data's, or one group's) stands between rounds.
enum Lane {
    Factoring {
        recipe: Box<DesignRecipe>,
        learner: Box<RecipeLearner>,
    },
    Summing {
        recipe: Box<DesignRecipe>,
        learner: Box<RecipeLearner>,
        first: Box<FirstSolution>,
        factor: Vec<u8>,
    },
    Done {
        recipe: Box<DesignRecipe>,
        learner: Box<RecipeLearner>,
        first: Box<FirstSolution>,
        sums: Vec<u8>,
        pieces: u64,
    },
    Failed(String),
}

/// Each group's rows (before dropping) and where its model stands.
type Lanes = BTreeMap<Option<String>, (usize, Lane)>;

/// The rounds of one specification over the table, for every group at
/// once (`group`: the grouping column; `only`: the groups to fit). A group
/// that fails a round stops there with its reason; the others go on.
///
/// A model whose coding needs levels (it reads text or dates) takes three
/// passes: the coding, round one, round two. Any other learns its coding in
/// round one (two passes). Round one runs again in double-double for the
/// groups whose factor in double is not enough: small designs (where the
/// in-memory fit would use double-double, known once the rows are counted)
/// and ill-conditioned ones.
async fn run_rounds(
    context: &SessionContext,
    spec: &ModelSpec,
    options: &FitOptions,
    non_finite: NonFinite,
    group: Option<&str>,
    only: Option<(&str, &BTreeSet<String>)>,
) -> Result<Lanes> {
    let mut plan = coding_plan(spec, options, non_finite, group.is_some());
    let mut lanes = if RecipeLearner::new(spec)?.codes_without_levels() {
        plan.round = Round::Factor;
        plan.learning = true;
        let lanes =
            learning_round(spec, (RoundQuery { plan: plan.clone(), group, only }).run(context).await?, options)?;
        plan.learning = false;
        lanes
    } else {
        let lanes = coding_round(spec, (RoundQuery { plan: plan.clone(), group, only }).run(context).await?)?;
        // Round one: the factor, given each group's coding.
        plan.round = Round::Factor;
        factor_round(context, &mut plan, group, only, lanes, options, extended_is_cheap).await?
    };
    // Groups whose factor in double is not enough: round one again, in
    // double-double, for them alone (the in-memory fit's rule).
    let mut redo = Lanes::new();
    for (label, (rows, lane)) in std::mem::take(&mut lanes) {
        match lane {
            Lane::Summing { recipe, learner, first, .. } if first.needs_extended() => {
                redo.insert(label, (rows, Lane::Factoring { recipe, learner }));
            }
            other => {
                lanes.insert(label, (rows, other));
            }
        }
    }
    if !redo.is_empty() {
        let mut redone = factor_round(context, &mut plan, group, only, redo, options, |_, _| true).await?;
        lanes.append(&mut redone);
    }
    // Round two: residual sums, given each group's factor (every
    // accumulator solves it again: O(p³), beside its rows' O(n·p²)).
    plan.round = Round::Residuals;
    plan.codings.clear();
    for (label, (_, lane)) in &lanes {
        if let Lane::Summing { learner, factor, .. } = lane {
            plan.codings.insert(group_key(label), to_hex(&learner.to_bytes()));
            plan.factors.insert(group_key(label), to_hex(factor));
        }
    }
    if plan.factors.is_empty() {
        return Ok(lanes);
    }
    for (label, _, state) in (RoundQuery { plan, group, only }).run(context).await? {
        let Some((_, lane)) = lanes.get_mut(&label) else { continue };
        if !matches!(lane, Lane::Summing { .. }) {
            continue;
        }
        let Lane::Summing { recipe, learner, first, .. } = std::mem::replace(lane, Lane::Failed(String::new())) else {
            continue;
        };
        *lane = match read_state(&state)? {
            GroupState::Failed(reason) => Lane::Failed(reason),
            GroupState::Empty => Lane::Failed("no rows reached the residual round".into()),
            GroupState::Held { body, pieces } => Lane::Done { recipe, learner, first, sums: body.to_vec(), pieces },
        };
    }
    Ok(lanes)
}

/// A group's key in the plan's maps.
fn group_key(label: &Option<String>) -> String {
    label.clone().unwrap_or_default()
}

/// Each group's lane from the coding round's merged states.
fn coding_round(spec: &ModelSpec, states: RoundRows) -> Result<Lanes> {
    let mut lanes = Lanes::new();
    for (label, rows, state) in states {
        let learner = match read_state(&state)? {
            GroupState::Failed(reason) => Err(reason),
            GroupState::Empty => RecipeLearner::new(spec).map_err(|e| e.to_string()),
            GroupState::Held { body, .. } => RecipeLearner::from_bytes(body, spec).map_err(|e| e.to_string()),
        };
        let lane = match learner {
            Err(reason) => Lane::Failed(reason),
            Ok(learner) => match learner.finish() {
                Ok(recipe) => Lane::Factoring { recipe: Box::new(recipe), learner: Box::new(learner) },
                Err(e) => Lane::Failed(e.to_string()),
            },
        };
        lanes.insert(label, (rows, lane));
    }
    Ok(lanes)
}

/// Each group's lane from a round one that learned the coding too.
fn learning_round(spec: &ModelSpec, states: RoundRows, options: &FitOptions) -> Result<Lanes> {
    let mut lanes = Lanes::new();
    for (label, rows, state) in states {
        let learned = match read_state(&state)? {
            GroupState::Failed(reason) => Err(reason),
            GroupState::Empty => RecipeLearner::new(spec).map(|learner| (learner, &[][..])).map_err(|e| e.to_string()),
            GroupState::Held { body, .. } => {
                let (coding, factor) = split_learning_piece(body)
                    .ok_or_else(|| EngineError::Data("a round's result is damaged".into()))?;
                RecipeLearner::from_bytes(coding, spec).map(|learner| (learner, factor)).map_err(|e| e.to_string())
            }
        };
        let lane = match learned {
            Err(reason) => Lane::Failed(reason),
            Ok((learner, factor)) => match learner.finish() {
                Err(e) => Lane::Failed(e.to_string()),
                Ok(_) if factor.is_empty() => Lane::Failed("no rows reached the factor round".into()),
                Ok(recipe) => summing_lane(Box::new(recipe), Box::new(learner), factor, options),
            },
        };
        lanes.insert(label, (rows, lane));
    }
    Ok(lanes)
}

/// Round one for every factoring lane of `lanes`, in double-double for the
/// groups where `extended(rows kept, design columns)` says so.
async fn factor_round(
    context: &SessionContext,
    plan: &mut RoundPlan,
    group: Option<&str>,
    only: Option<(&str, &BTreeSet<String>)>,
    mut lanes: Lanes,
    options: &FitOptions,
    extended: impl Fn(usize, usize) -> bool,
) -> Result<Lanes> {
    plan.round = Round::Factor;
    plan.codings.clear();
    plan.extended.clear();
    for (label, (_, lane)) in &lanes {
        if let Lane::Factoring { recipe, learner } = lane {
            plan.codings.insert(group_key(label), to_hex(&learner.to_bytes()));
            if extended(learner.rows_kept(), recipe.column_names.len()) {
                plan.extended.insert(group_key(label));
            }
        }
    }
    if plan.codings.is_empty() {
        return Ok(lanes);
    }
    let states = (RoundQuery { plan: plan.clone(), group, only }).run(context).await?;
    plan.extended.clear();
    for (label, _, state) in states {
        let Some((_, lane)) = lanes.get_mut(&label) else { continue };
        if !matches!(lane, Lane::Factoring { .. }) {
            continue;
        }
        let Lane::Factoring { recipe, learner } = std::mem::replace(lane, Lane::Failed(String::new())) else {
            continue;
        };
        *lane = match read_state(&state)? {
            GroupState::Failed(reason) => Lane::Failed(reason),
            GroupState::Empty => Lane::Failed("no rows reached the factor round".into()),
            GroupState::Held { body, .. } => summing_lane(recipe, learner, body, options),
        };
    }
    Ok(lanes)
}

/// A group's lane once round one has given its merged factor state.
fn summing_lane(recipe: Box<DesignRecipe>, learner: Box<RecipeLearner>, factor: &[u8], options: &FitOptions) -> Lane {
    match FactorAggregate::from_bytes(factor)
        .and_then(|f| FirstSolution::from_aggregate(f, &recipe, options.rank_tolerance))
    {
        Ok(first) => Lane::Summing { recipe, learner, first: Box::new(first), factor: factor.to_vec() },
        Err(e) => Lane::Failed(e.to_string()),
    }
}

/// A lane's fit, stamped with `provenance`.
fn finish_lane(lane: Lane, options: &FitOptions, provenance: Provenance) -> std::result::Result<AssembledFit, String> {
    match lane {
        Lane::Done { recipe, learner, first, sums, pieces } => {
            let second = ResidualAggregate::from_bytes(&sums).map_err(|e| e.to_string())?;
            let fit = finish(
                *first,
                second,
                *recipe,
                &options.covariance,
                learner.dropped().clone(),
                provenance,
                usize::try_from(pieces).unwrap_or(usize::MAX),
            )
            .map_err(|e| e.to_string())?;
            Ok(fit)
        }
        Lane::Failed(reason) => Err(reason),
        _ => Err("the fit did not run all its rounds".into()),
    }
}

/// Fits `spec` to the rows of `source` on `context` (local or a cluster):
/// the same fit as [`plumbline::fit::fit_batches`] on the same files.
pub async fn fit(
    context: &SessionContext,
    source: &DataSource,
    spec: &ModelSpec,
    options: &FitOptions,
    non_finite: NonFinite,
) -> Result<AssembledFit> {
    check_covariance_for_pieces(&options.covariance)?;
    RecipeLearner::new(spec)?;
    let (numbers, labels) = columns_read(spec);
    let stamp = Fingerprint::start(source, numbers.len() + labels.len());
    source.register(context).await?;
    let mut lanes = run_rounds(context, spec, options, non_finite, None, None).await?;
    let (rows, lane) = lanes.remove(&Some(WHOLE_DATA.to_string())).unwrap_or((0, Lane::Failed(String::new())));
    let provenance = stamp.finish(rows)?;
    match lane {
        Lane::Failed(reason) if reason.is_empty() => {
            Err(plumbline::Error::AllRowsDropped { detail: "none".into() }.into())
        }
        lane => finish_lane(lane, options, provenance).map_err(EngineError::Refused),
    }
}

/// Fits `spec` within each group of `column` of `source`'s rows on
/// `context`, with the pooled models: the same set as
/// [`plumbline::strata::fit_batches_by`] on the same files.
pub async fn fit_by(
    context: &SessionContext,
    source: &DataSource,
    spec: &ModelSpec,
    options: &FitOptions,
    non_finite: NonFinite,
    column: &str,
) -> Result<StratifiedFit> {
    let (numbers, labels) = columns_read_by_group(spec, options, column)?;
    let stamp = Fingerprint::start(source, numbers.len() + labels.len());
    source.register(context).await?;
    let mut lanes = run_rounds(context, spec, options, non_finite, Some(column), None).await?;
    let rows_without_group = lanes.remove(&None).map_or(0, |(rows, _)| rows);
    if lanes.is_empty() {
        return Err(plumbline::Error::ColumnAllMissing { column: column.to_string() }.into());
    }
    let rows_read = rows_without_group + lanes.values().map(|(rows, _)| rows).sum::<usize>();
    let provenance = stamp.finish(rows_read)?;
    let mut strata = Vec::with_capacity(lanes.len());
    let mut sizes = BTreeMap::new();
    for (label, (rows, lane)) in lanes {
        let label = label.unwrap_or_default();
        let stamp = group_stamp(&provenance, column, &label, rows);
        // Levels are checked last, as the batched fit checks them.
        let outcome = match finish_lane(lane, options, stamp).and_then(|fit| {
            check_levels(&fit.recipe).map_err(|e| e.to_string())?;
            Ok(fit)
        }) {
            Ok(fit) => StratumOutcome::Fitted(StratumModel::Assembled(Box::new(fit))),
            Err(reason) => StratumOutcome::NotFitted { reason },
        };
        sizes.insert(label.clone(), rows);
        strata.push(Stratum::new(label, rows, outcome));
    }

    let fitted: BTreeSet<String> = strata
        .iter()
        .filter(|s| matches!(s.outcome(), StratumOutcome::Fitted(_)))
        .map(|s| s.label().to_string())
        .collect();
    let pooled = if fitted.is_empty() {
        Err("no group could be fitted".to_string())
    } else {
        let stamp = pooled_stamp(&provenance, column, fitted.iter().map(|g| sizes[g]).sum());
        let pooled = pooled_fit(context, spec, options, non_finite, column, &fitted, stamp.clone()).await?;
        let with_levels = if spec.has_intercept() && fitted.len() > 1 {
            let spec = with_group_levels(spec, column);
            pooled_fit(context, &spec, options, non_finite, column, &fitted, stamp).await?.ok()
        } else {
            None
        };
        pooled.map(|fit| {
            (StratumModel::Assembled(Box::new(fit)), with_levels.map(|f| StratumModel::Assembled(Box::new(f))))
        })
    };
    Ok(StratifiedFit::from_parts(column.to_string(), spec.clone(), strata, rows_without_group, pooled, provenance))
}

/// One model over the rows of the `fitted` groups.
async fn pooled_fit(
    context: &SessionContext,
    spec: &ModelSpec,
    options: &FitOptions,
    non_finite: NonFinite,
    column: &str,
    fitted: &BTreeSet<String>,
    provenance: Provenance,
) -> Result<std::result::Result<AssembledFit, String>> {
    let mut lanes = run_rounds(context, spec, options, non_finite, None, Some((column, fitted))).await?;
    let lane = lanes.remove(&Some(WHOLE_DATA.to_string())).map(|(_, lane)| lane);
    Ok(match lane {
        Some(lane) => finish_lane(lane, options, provenance),
        None => Err("no rows".into()),
    })
}

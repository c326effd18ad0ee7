//! `plumbline value`: fit the sales, then value a parcel file of any size.
//!
//! The parcels are read in batches ([`plumbline::data::RowBatches`]), each
//! batch predicted with intervals and appended to the output, so memory is
//! bounded by one batch whatever the number of parcels. The output is written
//! to a temporary file beside the target and renamed into place only when
//! every parcel was valued: a failure leaves no half-written file. Progress
//! goes to standard error, one line per batch.

use super::fit::{
    batch_rows, fit_by_group, fit_local_with_flags, fit_options, load_for_fit, local_options, model_spec,
};
use super::CommandError;
use crate::cli::ValueArgs;
use plumbline::data::RowBatches;
use plumbline::fit::{fit_batches, AssembledFit};
use plumbline::model::design::term_columns_read;
use plumbline::polars::io::parquet::write::BatchedWriter;
use plumbline::polars::prelude::{Column, DataFrame, ParquetWriter};
use plumbline::prelude::*;
use std::path::Path;

/// A fitted model, in memory or assembled from batches, or one per group
/// (`--by`).
enum Model {
    InMemory(Box<Fit>),
    Assembled(Box<AssembledFit>),
    ByGroup(Box<StratifiedFit>),
    Local(Box<plumbline::local::LocalFit>),
}

/// One batch valued: each row's prediction or why it has none, and with
/// `--by` each row's group.
struct BatchValues {
    predictions: Vec<Option<Prediction>>,
    not_valued: Vec<Option<String>>,
    groups: Option<Vec<Option<String>>>,
}

impl Model {
    fn value(&self, frame: &Frame, level: f64) -> plumbline::Result<BatchValues> {
        let single = |predictions: Predictions| {
            let mut by_row: Vec<Option<Prediction>> = vec![None; frame.height()];
            let mut not_valued: Vec<Option<String>> = vec![None; frame.height()];
            for p in predictions.rows {
                let row = p.row - 1;
                by_row[row] = Some(p);
            }
            for row in predictions.skipped_rows {
                not_valued[row - 1] = Some("a term value is missing".to_string());
            }
            BatchValues { predictions: by_row, not_valued, groups: None }
        };
        Ok(match self {
            Model::InMemory(fit) => single(fit.predict(frame, level)?),
            Model::Assembled(fit) => single(fit.predict(frame, level)?),
            Model::Local(fit) => single(fit.predict(frame, level)?),
            Model::ByGroup(set) => {
                let valued = set.predict(frame, level)?;
                let mut values = BatchValues {
                    predictions: Vec::with_capacity(valued.rows.len()),
                    not_valued: Vec::with_capacity(valued.rows.len()),
                    groups: Some(Vec::with_capacity(valued.rows.len())),
                };
                for row in valued.rows {
                    values.predictions.push(row.prediction);
                    values.not_valued.push(row.not_valued);
                    values.groups.get_or_insert_with(Vec::new).push(row.group);
                }
                values
            }
        })
    }

    fn spec(&self) -> &ModelSpec {
        match self {
            Model::InMemory(fit) => fit.spec(),
            Model::Assembled(fit) => &fit.recipe.spec,
            Model::ByGroup(set) => set.spec(),
            Model::Local(fit) => fit.spec(),
        }
    }

    /// The grouping column, when each parcel is valued by its group's model.
    fn group_column(&self) -> Option<&str> {
        match self {
            Model::ByGroup(set) => Some(set.column()),
            _ => None,
        }
    }

    /// The columns a parcel file must hold besides the terms' (a local
    /// model's place columns, a grouping column).
    fn extra_columns(&self) -> (Vec<String>, Vec<String>) {
        match self {
            Model::ByGroup(set) => (Vec::new(), vec![set.column().to_string()]),
            Model::Local(fit) => {
                let options = &fit.summary().options;
                (vec![options.x_column.clone(), options.y_column.clone()], Vec::new())
            }
            _ => (Vec::new(), Vec::new()),
        }
    }
}

/// Runs `plumbline value`; returns the summary line to print.
pub fn run(args: &ValueArgs) -> Result<String, CommandError> {
    let kind = OutputKind::of(&args.out)?;
    let spec = model_spec(&args.fit)?;
    let options = fit_options(&args.fit);
    let model = match (&args.fit.by, batch_rows(&args.fit)) {
        _ if args.fit.local.is_some() => {
            let places = args.fit.local.as_deref().unwrap_or_default();
            Model::Local(Box::new(fit_local_with_flags(&args.fit, local_options(&args.fit, places)?)?))
        }
        (Some(column), _) => Model::ByGroup(Box::new(fit_by_group(&args.fit, column)?)),
        (None, Some(rows)) => {
            let rule = args.fit.input.non_finite.parse().map_err(CommandError::Usage)?;
            Model::Assembled(Box::new(fit_batches(&args.fit.data, &spec, &options, rows, rule)?))
        }
        (None, None) => {
            let frame = load_for_fit(&args.fit, &spec)?;
            Model::InMemory(Box::new(fit_with(&frame, &spec, &options)?))
        }
    };
    let (mut numbers, mut labels) = term_columns_read(model.spec());
    if let Some(id) = &args.fit.id {
        if !labels.contains(id) && !numbers.contains(id) {
            labels.push(id.clone());
        }
    }
    let (extra_numbers, extra_labels) = model.extra_columns();
    for column in extra_numbers {
        if !numbers.contains(&column) {
            numbers.push(column);
        }
    }
    for column in extra_labels {
        if !labels.contains(&column) {
            labels.push(column);
        }
    }
    let parcels = RowBatches::open(&args.parcels, &numbers, &labels, args.parcel_batch_rows)?;
    let log_target = model.spec().target_transform() == TargetTransform::Log;

    let temporary = temporary_path(&args.out);
    let outcome = (|| -> Result<(usize, usize), CommandError> {
        let mut sink = Sink::create(kind, &temporary, log_target)?;
        let (mut valued, mut skipped, mut row_offset) = (0usize, 0usize, 0usize);
        parcels.for_each_batch(|batch| {
            let values = model.value(batch, args.fit.level)?;
            let ids = match &args.fit.id {
                Some(column) => Some(batch.label_column(column)?),
                None => None,
            };
            let table = ValueTable::of_batch(row_offset, values, ids);
            valued += table.estimate.iter().filter(|v| v.is_some()).count();
            skipped += table.estimate.iter().filter(|v| v.is_none()).count();
            row_offset += batch.height();
            sink.write(table).map_err(|e| plumbline::Error::Specification(e.to_string()))?;
            eprintln!("valued {valued} parcels ({skipped} not valued)");
            Ok(())
        })?;
        sink.finish()?;
        Ok((valued, skipped))
    })();
    match outcome {
        Ok((valued, skipped)) => {
            std::fs::rename(&temporary, &args.out).map_err(|e| {
                CommandError::Runtime(format!("cannot move the values into `{}`: {e}", args.out.display()))
            })?;
            let by = match model.group_column() {
                Some(column) => format!(" each by its own {column}'s model;"),
                None => String::new(),
            };
            Ok(format!(
                "{valued} parcels valued,{by} {skipped} not valued (left blank, the reason in `not_valued`), written to {}\n\
                 These are model estimates for analysis, not appraisals; local assessment law and licensed \
                 appraisal practice govern any use for taxation or lending.\n",
                args.out.display()
            ))
        }
        Err(e) => {
            let _ = std::fs::remove_file(&temporary);
            Err(e)
        }
    }
}

fn temporary_path(out: &Path) -> std::path::PathBuf {
    let name = out.file_name().map(|n| n.to_string_lossy().to_string()).unwrap_or_else(|| "values".into());
    out.with_file_name(format!(".{name}.partial-{}", std::process::id()))
}

/// The output formats.
#[derive(Debug, Clone, Copy)]
enum OutputKind {
    Csv,
    Parquet,
}

impl OutputKind {
    fn of(path: &Path) -> Result<Self, CommandError> {
        match path.extension().and_then(|e| e.to_str()).map(str::to_ascii_lowercase).as_deref() {
            Some("csv") => Ok(OutputKind::Csv),
            Some("parquet") => Ok(OutputKind::Parquet),
            _ => Err(CommandError::Usage(format!(
                "--out `{}`: write the values to a `.csv` or `.parquet` file",
                path.display()
            ))),
        }
    }
}

/// One batch of output rows: every parcel of the batch in input order, the
/// ones that could not be valued left blank with the reason.
struct ValueTable {
    row: Vec<u64>,
    id: Option<Vec<Option<String>>>,
    group: Option<Vec<Option<String>>>,
    estimate: Vec<Option<f64>>,
    se_fit: Vec<Option<f64>>,
    ci_low: Vec<Option<f64>>,
    ci_high: Vec<Option<f64>>,
    pi_low: Vec<Option<f64>>,
    pi_high: Vec<Option<f64>>,
    value_median: Vec<Option<f64>>,
    value_mean: Vec<Option<f64>>,
    outside_range: Vec<String>,
    not_valued: Vec<String>,
}

impl ValueTable {
    fn of_batch(offset: usize, values: BatchValues, ids: Option<Vec<Option<String>>>) -> Self {
        let by_row: Vec<Option<&Prediction>> = values.predictions.iter().map(Option::as_ref).collect();
        let height = by_row.len();
        let get = |f: fn(&Prediction) -> Option<f64>| by_row.iter().map(|p| p.and_then(f)).collect::<Vec<_>>();
        ValueTable {
            row: (0..height).map(|i| (offset + i + 1) as u64).collect(),
            id: ids,
            group: values.groups,
            estimate: get(|p| Some(p.estimate)),
            se_fit: get(|p| Some(p.se_fit)),
            ci_low: get(|p| Some(p.ci_low)),
            ci_high: get(|p| Some(p.ci_high)),
            pi_low: get(|p| Some(p.pi_low)),
            pi_high: get(|p| Some(p.pi_high)),
            value_median: get(|p| p.median_original),
            value_mean: get(|p| p.mean_original),
            outside_range: by_row.iter().map(|p| p.map(|p| p.outside_range.join(";")).unwrap_or_default()).collect(),
            not_valued: values.not_valued.into_iter().map(Option::unwrap_or_default).collect(),
        }
    }

    /// Column names and values, in output order. `log_target` adds the two
    /// original-scale values.
    fn columns(self, log_target: bool) -> Vec<Column> {
        let mut out = vec![Column::new("row".into(), self.row)];
        if let Some(id) = self.id {
            out.push(Column::new("id".into(), id));
        }
        if let Some(group) = self.group {
            out.push(Column::new("group".into(), group));
        }
        for (name, values) in [
            ("estimate", self.estimate),
            ("se_fit", self.se_fit),
            ("ci_low", self.ci_low),
            ("ci_high", self.ci_high),
            ("pi_low", self.pi_low),
            ("pi_high", self.pi_high),
        ] {
            out.push(Column::new(name.into(), values));
        }
        if log_target {
            out.push(Column::new("value_median".into(), self.value_median));
            out.push(Column::new("value_mean".into(), self.value_mean));
        }
        out.push(Column::new("outside_range".into(), self.outside_range));
        out.push(Column::new("not_valued".into(), self.not_valued));
        out
    }
}

/// Where output batches go.
enum Sink {
    /// CSV: the header goes out with the first batch.
    Csv { writer: Box<csv::Writer<std::io::BufWriter<std::fs::File>>>, log_target: bool, header_written: bool },
    /// Parquet: the writer is opened with the first batch's schema.
    Parquet { writer: Option<Box<BatchedWriter<std::fs::File>>>, file: std::fs::File, log_target: bool },
}

impl Sink {
    fn create(kind: OutputKind, path: &Path, log_target: bool) -> Result<Self, CommandError> {
        let file = std::fs::File::create(path)
            .map_err(|e| CommandError::Runtime(format!("cannot create `{}`: {e}", path.display())))?;
        Ok(match kind {
            OutputKind::Csv => Sink::Csv {
                writer: Box::new(csv::Writer::from_writer(std::io::BufWriter::new(file))),
                log_target,
                header_written: false,
            },
            OutputKind::Parquet => Sink::Parquet { writer: None, file, log_target },
        })
    }

    fn write(&mut self, table: ValueTable) -> Result<(), CommandError> {
        let failed = |e: &dyn std::fmt::Display| CommandError::Runtime(format!("cannot write the values: {e}"));
        match self {
            Sink::Csv { writer, log_target, header_written } => {
                let columns = table.columns(*log_target);
                if !*header_written {
                    writer.write_record(columns.iter().map(|c| c.name().as_str())).map_err(|e| failed(&e))?;
                    *header_written = true;
                }
                let height = columns.first().map_or(0, |c| c.len());
                for i in 0..height {
                    let record = columns.iter().map(|c| cell_text(c, i));
                    writer.write_record(record).map_err(|e| failed(&e))?;
                }
                Ok(())
            }
            Sink::Parquet { writer, file, log_target } => {
                let columns = table.columns(*log_target);
                let height = columns.first().map_or(0, |c| c.len());
                let frame = DataFrame::new(height, columns).map_err(|e| failed(&e))?;
                if writer.is_none() {
                    let handle = file.try_clone().map_err(|e| failed(&e))?;
                    *writer =
                        Some(Box::new(ParquetWriter::new(handle).batched(frame.schema()).map_err(|e| failed(&e))?));
                }
                if let Some(w) = writer {
                    w.write_batch(&frame).map_err(|e| failed(&e))?;
                }
                Ok(())
            }
        }
    }

    fn finish(self) -> Result<(), CommandError> {
        let failed = |e: &dyn std::fmt::Display| CommandError::Runtime(format!("cannot finish the values file: {e}"));
        match self {
            Sink::Csv { mut writer, .. } => writer.flush().map_err(|e| failed(&e)),
            Sink::Parquet { writer: Some(writer), file, .. } => {
                writer.finish().map_err(|e| failed(&e))?;
                file.sync_all().map_err(|e| failed(&e))
            }
            Sink::Parquet { writer: None, .. } => {
                Err(CommandError::Runtime("no parcel was read, so no values file was written".into()))
            }
        }
    }
}

/// One output cell as CSV text: numbers in Rust's shortest form that reads
/// back to the same double (every digit kept), blank for a missing value.
fn cell_text(column: &Column, row: usize) -> String {
    use plumbline::polars::prelude::AnyValue;
    match column.get(row) {
        Ok(AnyValue::Float64(v)) => format!("{v}"),
        Ok(AnyValue::UInt64(v)) => v.to_string(),
        Ok(AnyValue::String(v)) => v.to_string(),
        Ok(AnyValue::StringOwned(v)) => v.to_string(),
        _ => String::new(),
    }
}

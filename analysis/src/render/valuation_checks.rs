//! The model reviewer's checks as text and HTML: the spatial check of
//! residuals, ratio statistics by price tier, value accuracy (in sample and
//! held out), the value roll and the sales-chasing check.
//!
//! Each result is first laid out as a [`Sheet`] — a heading, lines of
//! context, tables and a reading — and the sheet is written as aligned text
//! and as an HTML card, so the two forms never say different things. Each
//! bundle also carries the result's versioned JSON document.

use super::bundle::{MimeBundle, Report};
use super::html::{card_end, card_start, escape, table, CAUTION, SUBTLE};
use super::numbers::{format_count, format_p_value, format_significant};
use super::prose::{wrap, VALUATION_CAUTION};
use crate::diagnose::SpatialCheck;
use crate::documents::{document_json, DocumentKind};
use crate::spatial::{MoranTest, WeightStyle};
use crate::value::{HoldoutAccuracy, RatioStatistics, SalesChasingCheck, TierStudy, ValueAccuracy, ValueRoll};

/// One table of a sheet: header, which columns are numbers, rows.
struct SheetTable {
    header: Vec<String>,
    numeric: Vec<bool>,
    rows: Vec<Vec<String>>,
}

/// A result laid out once for both text and HTML.
struct Sheet {
    heading: String,
    context: Vec<String>,
    tables: Vec<SheetTable>,
    reading: Vec<String>,
    caution: bool,
}

impl Sheet {
    fn new(heading: impl Into<String>) -> Self {
        Self { heading: heading.into(), context: Vec::new(), tables: Vec::new(), reading: Vec::new(), caution: false }
    }

    fn table(&mut self, header: &[&str], numeric: &[bool], rows: Vec<Vec<String>>) {
        self.tables.push(SheetTable {
            header: header.iter().map(|h| h.to_string()).collect(),
            numeric: numeric.to_vec(),
            rows,
        });
    }

    fn text(&self) -> String {
        let mut out = format!("{}\n", self.heading);
        for line in &self.context {
            out.push_str(&wrap(line, 96, "  ", "  "));
        }
        for t in &self.tables {
            let columns = t.header.len();
            let width = |c: usize| {
                t.rows
                    .iter()
                    .map(|r| r.get(c).map_or(0, |v| v.chars().count()))
                    .chain([t.header[c].chars().count()])
                    .max()
            };
            let widths: Vec<usize> = (0..columns).map(|c| width(c).unwrap_or(0)).collect();
            let line = |cells: &[String]| {
                let parts: Vec<String> = (0..columns)
                    .map(|c| {
                        let v = cells.get(c).map_or("", String::as_str);
                        if t.numeric.get(c).copied().unwrap_or(false) {
                            format!("{v:>w$}", w = widths[c])
                        } else {
                            format!("{v:<w$}", w = widths[c])
                        }
                    })
                    .collect();
                format!("  {}\n", parts.join("  ").trim_end())
            };
            out.push('\n');
            out.push_str(&line(&t.header));
            for row in &t.rows {
                out.push_str(&line(row));
            }
        }
        if !self.reading.is_empty() {
            out.push('\n');
        }
        for line in &self.reading {
            out.push_str(&wrap(line, 96, "  ", "  "));
        }
        if self.caution {
            out.push('\n');
            out.push_str(&wrap(VALUATION_CAUTION, 96, "  ", "  "));
        }
        out
    }

    fn html(&self) -> String {
        let mut out = String::new();
        card_start(&mut out, &self.heading);
        for line in &self.context {
            out.push_str(&format!("<div style=\"{SUBTLE}\">{}</div>\n", escape(line)));
        }
        for t in &self.tables {
            let header: Vec<&str> = t.header.iter().map(String::as_str).collect();
            let rows: Vec<Vec<String>> = t.rows.iter().map(|r| r.iter().map(|c| escape(c)).collect()).collect();
            table(&mut out, &header, &t.numeric, &rows);
        }
        for line in &self.reading {
            out.push_str(&format!("<p style=\"margin:6px 0\">{}</p>\n", escape(line)));
        }
        if self.caution {
            out.push_str(&format!("<div style=\"{CAUTION}\">{}</div>\n", escape(VALUATION_CAUTION)));
        }
        card_end(&mut out);
        out
    }

    fn bundle<T: DocumentKind>(&self, result: &T) -> MimeBundle {
        let bundle = MimeBundle::text_and_html(self.text(), self.html());
        match document_json(result) {
            Ok(json) => bundle.with(T::MIME, json),
            Err(_) => bundle,
        }
    }
}

/// A residual summary on the model's scale: four decimals, signed; the
/// rounding noise of a mean that is zero by construction reads as `0.0000`.
fn miss(x: f64) -> String {
    if x.abs() < 5e-5 {
        "0.0000".into()
    } else {
        format!("{x:+.4}")
    }
}

fn share(x: f64) -> String {
    format!("{} %", format_significant(100.0 * x, 3))
}

/// A log change as a percentage: `exp(d) − 1`.
fn log_change(d: f64) -> String {
    let pct = 100.0 * d.exp_m1();
    format!("{}{} %", if pct > 0.0 { "+" } else { "" }, format_significant(pct, 3))
}

fn moran_rows(m: &MoranTest) -> Vec<Vec<String>> {
    vec![
        vec!["Moran's I".into(), format_significant(m.statistic, 4)],
        vec!["expected if no pattern".into(), format_significant(m.expected, 4)],
        vec!["standard score".into(), format_significant(m.z_score, 4)],
        vec!["p-value, two-sided".into(), format_p_value(Some(m.p_value))],
        vec!["p-value, clustering only".into(), format_p_value(Some(m.p_value_clustering))],
    ]
}

fn spatial_sheet(check: &SpatialCheck) -> Sheet {
    let m = &check.moran;
    let mut sheet = Sheet::new(format!("Do the misses cluster in space? — {} sales", format_count(m.n)));
    let style = match m.style {
        WeightStyle::RowStandardised => "each neighbour weighted 1/count",
        WeightStyle::Binary => "each neighbour weighted 1",
    };
    sheet.context.push(format!("model: {}", check.model));
    let places = match check.options.coordinates {
        crate::spatial::Coordinates::Planar => format!("({}, {})", check.options.x_column, check.options.y_column),
        crate::spatial::Coordinates::Geographic => format!(
            "longitude {} and latitude {} (geodesic distances on WGS 84, km)",
            check.options.x_column, check.options.y_column
        ),
    };
    sheet.context.push(format!(
        "neighbours: {} of each sale by {places}; {style}; moments for {}",
        m.neighbourhood.describe(),
        m.assumption.describe()
    ));
    sheet.table(&["figure", "value"], &[false, true], moran_rows(m));
    if !check.by_group.is_empty() {
        let rows = check
            .by_group
            .iter()
            .map(|g| vec![g.group.clone(), format_count(g.count), miss(g.mean), miss(g.median), share(g.share_above)])
            .collect();
        let group = check.options.group_column.as_deref().unwrap_or("group");
        sheet.table(
            &[group, "sales", "mean miss", "median miss", "valued low"],
            &[false, true, true, true, true],
            rows,
        );
    }
    sheet.reading.push(if m.p_value < 0.05 && m.statistic > m.expected {
        "Neighbouring sales miss in the same direction far more often than chance allows: the model leaves a location \
         effect in its residuals. Add a location term (distance to a place, or finer location groups) and check again."
            .to_string()
    } else if m.p_value < 0.05 {
        "Neighbouring sales miss in opposite directions more often than chance allows (a checkerboard pattern), which \
         is unusual for sales; check the coordinates."
            .to_string()
    } else {
        "No clustering of the misses beyond chance at the 5 % level: the model's location terms account for where \
         the sales lie, as far as this neighbourhood can tell."
            .to_string()
    });
    sheet
}

impl Report for SpatialCheck {
    fn bundle(&self) -> MimeBundle {
        spatial_sheet(self).bundle(self)
    }
}

fn statistics_cells(s: Option<&RatioStatistics>) -> Vec<String> {
    match s {
        Some(s) => vec![
            format_count(s.count),
            format_significant(s.median, 4),
            format_significant(s.cod, 3),
            format_significant(s.prd, 4),
        ],
        None => vec!["<2".into(), String::new(), String::new(), String::new()],
    }
}

use super::numbers::format_money as money;

impl Report for TierStudy {
    fn bundle(&self) -> MimeBundle {
        let mut sheet = Sheet::new(format!("Ratios by price tier — {} tiers", self.tiers.len()));
        sheet.context.push(format!(
            "{} sales with a value and a price; {} trimmed as outliers; tiers of equal count by {}",
            format_count(self.n_pairs),
            self.trimmed.len(),
            self.basis.describe()
        ));
        let rows = self
            .tiers
            .iter()
            .map(|t| {
                let mut row = vec![t.tier.to_string(), format!("{} – {}", money(t.lower), money(t.upper))];
                row.extend(statistics_cells(t.statistics.as_ref()));
                row
            })
            .collect();
        sheet.table(&["tier", "amounts", "sales", "median", "COD", "PRD"], &[true, true, true, true, true, true], rows);
        let prb = self.overall.prb.map_or_else(|| "—".into(), |p| format_significant(p, 3));
        sheet.reading.push(format!(
            "Median ratio of the top tier minus the bottom tier: {}; PRB over all sales: {prb}. Medians falling from \
             tier to tier say dear properties are valued low against cheap ones (regressive values); rising medians \
             the reverse.",
            format_significant(self.median_spread, 3)
        ));
        sheet.caution = true;
        sheet.bundle(self)
    }
}

fn accuracy_rows(a: &ValueAccuracy) -> Vec<Vec<String>> {
    vec![
        vec!["sales scored".into(), format_count(a.count)],
        vec!["within ±10 % of price".into(), share(a.within_10)],
        vec!["within ±20 % of price".into(), share(a.within_20)],
        vec!["forecast standard deviation (sd of ln A/S)".into(), format_significant(a.fsd, 3)],
        vec!["typical level (exp mean ln A/S − 1)".into(), log_change(a.mean_log_ratio)],
        vec!["median absolute error".into(), format!("{} %", format_significant(a.median_absolute_error, 3))],
    ]
}

fn bucket_rows(a: &ValueAccuracy) -> Vec<Vec<String>> {
    a.buckets.iter().map(|b| vec![b.label.clone(), format_count(b.count), share(b.share)]).collect()
}

impl Report for ValueAccuracy {
    fn bundle(&self) -> MimeBundle {
        let mut sheet = Sheet::new(format!("How close values come to prices — {} sales", format_count(self.count)));
        sheet.table(&["figure", "value"], &[false, true], accuracy_rows(self));
        sheet.table(&["error band", "sales", "share"], &[false, true, true], bucket_rows(self));
        sheet.caution = true;
        sheet.bundle(self)
    }
}

impl Report for HoldoutAccuracy {
    fn bundle(&self) -> MimeBundle {
        let mut sheet = Sheet::new("How close values come to prices — fitted sales and held-out sales");
        sheet.context.push(format!("split: {}", self.split));
        sheet.context.push(format!("fitted on: {}", self.training_source));
        sheet.context.push(format!("held out: {}", self.holdout_source));
        let a = accuracy_rows(&self.in_sample);
        let b = accuracy_rows(&self.holdout);
        let rows = a.into_iter().zip(b).map(|(x, y)| vec![x[0].clone(), x[1].clone(), y[1].clone()]).collect();
        sheet.table(&["figure", "fitted sales", "held-out sales"], &[false, true, true], rows);
        if self.holdout_not_valued > 0 {
            sheet.context.push(format!(
                "{} held-out sales could not be valued (a term value missing) and are not scored",
                self.holdout_not_valued
            ));
        }
        sheet.reading.push(format!(
            "Held-out sales measure what the model does on sales it never saw: {} of them within ±10 % against {} \
             of the fitted sales.",
            share(self.holdout.within_10),
            share(self.in_sample.within_10)
        ));
        sheet.caution = true;
        sheet.bundle(self)
    }
}

impl Report for ValueRoll {
    fn bundle(&self) -> MimeBundle {
        let mut sheet = Sheet::new(format!(
            "Value roll as of {} — {} parcels",
            self.valuation_date,
            format_count(self.parcels.len())
        ));
        sheet.context.push(format!("model: {}", self.model));
        sheet.context.push(format!("parcels: {}", self.parcels_source));
        if let Some(sales) = &self.sales_source {
            sheet.context.push(format!("sales: {sales}"));
        }
        let quantiles = self.value_quantiles(&[0.0, 0.25, 0.5, 0.75, 1.0]);
        let q = |i: usize| quantiles.as_ref().map_or_else(|| "—".to_string(), |q| money(q[i]));
        // Parcels without a value, counted by reason (a version 1 roll gives none:
        // its only reason was a missing term value).
        let mut reasons: std::collections::BTreeMap<&str, usize> = std::collections::BTreeMap::new();
        for parcel in self.parcels.iter().filter(|p| p.value.is_none()) {
            *reasons.entry(parcel.not_valued.as_deref().unwrap_or("a term value is missing")).or_default() += 1;
        }
        let mut rows = vec![
            vec!["parcels valued".into(), format_count(self.valued())],
            vec!["parcels not valued".into(), format_count(self.parcels.len() - self.valued())],
        ];
        rows.extend(reasons.iter().map(|(reason, count)| vec![format!("  {reason}"), format_count(*count)]));
        sheet.table(
            &["figure", "value"],
            &[false, true],
            [
                rows,
                vec![
                    vec!["parcels with a sale".into(), format_count(self.sold())],
                    vec!["lowest value".into(), q(0)],
                    vec!["lower quartile".into(), q(1)],
                    vec!["median value".into(), q(2)],
                    vec!["upper quartile".into(), q(3)],
                    vec!["highest value".into(), q(4)],
                ],
            ]
            .concat(),
        );
        sheet.reading.push(
            "Every parcel's value travels in this output's JSON document; a later run's roll is compared with it \
             for the sales-chasing check (`plumbline diff`)."
                .into(),
        );
        sheet.caution = true;
        sheet.bundle(self)
    }
}

impl Report for SalesChasingCheck {
    fn bundle(&self) -> MimeBundle {
        let mut sheet = Sheet::new(format!(
            "Were sold parcels revalued differently? — {} to {}",
            self.earlier_date, self.later_date
        ));
        sheet.context.push(format!(
            "{} parcels sold between the runs, {} not sold; {} left out (on one roll only, or not valued by both)",
            format_count(self.sold.count),
            format_count(self.unsold.count),
            format_count(self.not_paired)
        ));
        sheet.table(
            &["parcels", "count", "median value change", "mean value change"],
            &[false, true, true, true],
            [("sold between the runs", &self.sold), ("not sold", &self.unsold)]
                .iter()
                .map(|(label, c)| {
                    vec![
                        label.to_string(),
                        format_count(c.count),
                        log_change(c.median_log_change),
                        log_change(c.mean_log_change),
                    ]
                })
                .collect(),
        );
        sheet.table(
            &["rank-sum test (sold vs not sold)", "value"],
            &[false, true],
            vec![
                vec!["U of the sold parcels".into(), format_significant(self.rank_sum.u, 6)],
                vec!["standard score".into(), format_significant(self.rank_sum.z_score, 4)],
                vec!["p-value, two-sided".into(), format_p_value(Some(self.rank_sum.p_value))],
            ],
        );
        let mut ratio_rows = Vec::new();
        for (label, s) in [("earlier values", &self.sold_ratios_earlier), ("later values", &self.sold_ratios_later)] {
            let mut row = vec![label.to_string()];
            row.extend(statistics_cells(s.as_ref()));
            ratio_rows.push(row);
        }
        sheet.table(
            &["sold parcels' ratios", "sales", "median", "COD", "PRD"],
            &[false, true, true, true, true],
            ratio_rows,
        );
        let cod = |s: &Option<RatioStatistics>| s.as_ref().map_or(f64::NAN, |s| s.cod);
        // Our screen, not a published cut-off: a COD of the sold parcels that
        // halves between runs is what copying prices into values looks like.
        let collapsed = cod(&self.sold_ratios_later) < 0.5 * cod(&self.sold_ratios_earlier);
        sheet.reading.push(if self.rank_sum.p_value < 0.05 || collapsed {
            format!(
                "A sign of sales chasing: {}. Check how the sold parcels' values were set before using the ratio study \
                 of these sales.",
                if collapsed {
                    "the sold parcels' COD fell by more than half between the runs"
                } else {
                    "sold parcels' values moved differently from unsold parcels' (p < 0.05)"
                }
            )
        } else {
            "No sign of sales chasing: sold and unsold parcels' values moved alike, and the sold parcels' ratios kept \
             their spread."
                .to_string()
        });
        sheet.caution = true;
        sheet.bundle(self)
    }
}

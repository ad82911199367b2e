//! `spinney`: the native command line. It runs the same core as the page on files too big
//! for a browser: `spinney inspect FILE` prints how a file reads and a summary of every column
//! (a readable table, or JSON with `--json`); `spinney fit` fits and reports a model (and
//! saves it with `--save-model`); `spinney predict MODEL FILE` scores a file with a saved
//! model; `spinney evaluate` validates a model honestly and `spinney tune` searches its settings;
//! `spinney explain MODEL FILE` shows what drives it; `spinney export-onnx MODEL OUT` writes a
//! saved model as an ONNX file.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

mod bench;
mod evaluate;
mod explain;
mod fit;
mod predict;
mod tune;

use anyhow::Context;
use clap::{Parser, Subcommand};
use spinney_core::data::{self, read_table, Kind, ReadOptions, Values};
use spinney_core::progress::Silent;

#[derive(Parser)]
#[command(
    name = "spinney",
    version,
    about = "Tree-ensemble models for sensitive records, on your own machine."
)]
struct Args {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Read a CSV/TSV/xlsx/ods file and summarise every column.
    Inspect {
        /// The file to read.
        file: PathBuf,
        /// Spreadsheet sheet to read (default: the first).
        #[arg(long, value_name = "NAME")]
        sheet: Option<String>,
        /// An extra missing-value token, such as -999 (repeatable; write --missing=-999).
        #[arg(long = "missing", value_name = "TOKEN", allow_hyphen_values = true)]
        missing: Vec<String>,
        /// Choose a column's kind: COLUMN=KIND, KIND one of number, "whole number", yes/no,
        /// category, date, date-time, text (repeatable).
        #[arg(long = "kind", value_name = "COLUMN=KIND")]
        kinds: Vec<String>,
        /// Print machine-readable JSON instead of a table.
        #[arg(long)]
        json: bool,
        /// With --json, also print every cell (for checks against other readers).
        #[arg(long)]
        cells: bool,
    },
    /// Fit a model (tree, bagging, forest, AdaBoost, gradient boosting) on every row of a file and report it.
    Fit(fit::FitArgs),
    /// Validate a model honestly (out-of-bag, holdout, k-fold, grouped folds, bootstrap) and
    /// report its metrics with intervals beside a baseline.
    Evaluate(evaluate::EvaluateArgs),
    /// Search settings (a grid or a random sample), each scored by a validation scheme;
    /// optionally nested cross-validation for an honest figure.
    Tune(tune::TuneArgs),
    /// Score every row of a file with a saved model and write the predictions as CSV.
    Predict(predict::PredictArgs),
    /// Write a saved model as an ONNX file, to score it with any ONNX runtime.
    ExportOnnx {
        /// The model file, written by `spinney fit ... --save-model PATH`.
        model: PathBuf,
        /// The ONNX file to write.
        output: PathBuf,
    },
    /// What drives a saved model, and why single records scored as they did: importance,
    /// per-record contributions, partial dependence, interactions.
    Explain(explain::ExplainArgs),
    /// Measure speed and memory on generated data, and print the figures.
    Bench {
        #[command(subcommand)]
        what: BenchWhat,
    },
}

#[derive(Subcommand)]
enum BenchWhat {
    /// Reading a CSV of 20 number and 5 category columns (generated once under bench-data/).
    Read {
        /// Size of the generated file in megabytes.
        #[arg(long, default_value_t = 100)]
        mb: u64,
        /// How many times to read it (the fastest is reported).
        #[arg(long, default_value_t = 3)]
        repeats: u32,
    },
}

fn main() -> ExitCode {
    let args = Args::parse();
    match run(args) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e:#}");
            ExitCode::from(1)
        }
    }
}

fn run(args: Args) -> anyhow::Result<()> {
    match args.command {
        Command::Bench {
            what: BenchWhat::Read { mb, repeats },
        } => bench::read(mb, repeats),
        Command::Fit(args) => fit::fit(args),
        Command::Evaluate(args) => evaluate::evaluate(args),
        Command::Tune(args) => tune::tune_command(args),
        Command::Predict(args) => predict::predict(args),
        Command::ExportOnnx { model, output } => {
            let bytes = std::fs::read(&model)
                .with_context(|| format!("cannot read the model file {}", model.display()))?;
            let fitted = spinney_core::model_file::read_model(&bytes)
                .map_err(|e| anyhow::anyhow!("{}: {e}", model.display()))?;
            let onnx = spinney_core::onnx::write_onnx(&fitted);
            std::fs::write(&output, &onnx)
                .with_context(|| format!("cannot write {}", output.display()))?;
            println!(
                "wrote {} ({} bytes): input 'predictors' holds {} columns, as its metadata entry \
                 spinney.predictors describes",
                output.display(),
                onnx.len(),
                fitted.predictors.len()
            );
            Ok(())
        }
        Command::Explain(args) => explain::explain(args),
        Command::Inspect {
            file,
            sheet,
            missing,
            kinds,
            json,
            cells,
        } => {
            let bytes =
                std::fs::read(&file).with_context(|| format!("cannot read {}", file.display()))?;
            let kinds = kinds
                .iter()
                .map(|k| parse_kind_choice(k))
                .collect::<anyhow::Result<Vec<_>>>()?;
            let options = ReadOptions {
                file_name: file.file_name().map(|n| n.to_string_lossy().into_owned()),
                sheet,
                missing_tokens: missing,
                kinds,
                max_bytes: None,
                fingerprint: None,
            };
            let loaded = read_table(&bytes, &options, &mut Silent)
                .map_err(|e| anyhow::anyhow!("{}: {e}", file.display()))?;
            let report = data::report(&loaded, &file.display().to_string());
            let mut out = std::io::stdout().lock();
            if json {
                let mut value = serde_json::to_value(&report)?;
                if cells {
                    value["cells"] = cell_rows(&loaded.table);
                }
                serde_json::to_writer_pretty(&mut out, &value)?;
                writeln!(out)?;
            } else {
                print_table(&mut out, &report)?;
            }
            Ok(())
        }
    }
}

fn parse_kind_choice(text: &str) -> anyhow::Result<(String, Kind)> {
    let (column, kind) = text.rsplit_once('=').with_context(|| {
        format!("--kind {text:?}: write COLUMN=KIND, e.g. --kind ward=category")
    })?;
    let kind = Kind::from_label(kind).with_context(|| {
        let all: Vec<_> = Kind::ALL.iter().map(|k| k.label()).collect();
        format!(
            "--kind {text:?}: unknown kind '{kind}'; use one of: {}",
            all.join(", ")
        )
    })?;
    Ok((column.to_string(), kind))
}

/// Every cell as JSON: null when missing, numbers for numeric kinds, text otherwise.
fn cell_rows(table: &data::Table) -> serde_json::Value {
    let rows = (0..table.rows)
        .map(|r| {
            table
                .columns
                .iter()
                .map(|c| match (&c.values, c.kind) {
                    (Values::Numbers(v), k) if k != Kind::YesNo => {
                        if v[r].is_nan() {
                            serde_json::Value::Null
                        } else {
                            serde_json::json!(v[r])
                        }
                    }
                    _ => c
                        .display(r)
                        .map_or(serde_json::Value::Null, serde_json::Value::String),
                })
                .collect::<Vec<_>>()
        })
        .collect::<Vec<_>>();
    serde_json::json!(rows)
}

fn print_table(out: &mut impl Write, report: &data::TableReport) -> anyhow::Result<()> {
    writeln!(
        out,
        "{}: {} rows, {} columns; {}",
        report.file,
        report.rows,
        report.columns.len(),
        report.source.description
    )?;
    writeln!(out, "fingerprint (SHA-256): {}", report.fingerprint_sha256)?;
    let header = [
        "column",
        "kind",
        "missing",
        "distinct",
        "min / top",
        "median",
        "max",
        "flags",
    ];
    let mut lines: Vec<[String; 8]> = Vec::new();
    for c in &report.columns {
        let (low, mid, high) = if c.top.is_empty() {
            {
                let show = |x: Option<f64>| {
                    x.map_or_else(|| "-".to_string(), |v| data::format_statistic(c.kind, v))
                };
                (show(c.min), show(c.median), show(c.max))
            }
        } else {
            let top: Vec<String> = c
                .top
                .iter()
                .take(3)
                .map(|t| format!("{} ({})", t.value, t.count))
                .collect();
            (top.join(", "), String::new(), String::new())
        };
        let kind = match &c.unit {
            Some(unit) => format!("{} [{unit}]", c.kind.label()),
            None => c.kind.label().to_string(),
        };
        lines.push([
            c.name.clone(),
            kind,
            format!("{} ({:.1}%)", c.missing, 100.0 * c.missing_share),
            c.distinct.to_string(),
            low,
            mid,
            high,
            c.flags
                .iter()
                .map(|f| f.label())
                .collect::<Vec<_>>()
                .join(", "),
        ]);
    }
    let widths: Vec<usize> = (0..8)
        .map(|i| {
            lines
                .iter()
                .map(|l| l[i].chars().count())
                .chain([header[i].len()])
                .max()
                .unwrap_or(0)
                .min(40)
        })
        .collect();
    let row = |cells: Vec<&str>| -> String {
        cells
            .iter()
            .zip(&widths)
            .map(|(c, w)| {
                let c: String = c.chars().take(*w).collect();
                format!("{c:<w$}")
            })
            .collect::<Vec<_>>()
            .join("  ")
            .trim_end()
            .to_string()
    };
    writeln!(out)?;
    writeln!(out, "{}", row(header.to_vec()))?;
    for l in &lines {
        writeln!(out, "{}", row(l.iter().map(String::as_str).collect()))?;
    }
    if !report.notices.is_empty() {
        writeln!(out, "\nnotices:")?;
        for n in &report.notices {
            writeln!(out, "  - {n}")?;
        }
    }
    Ok(())
}

//! `spinney predict MODEL FILE`: scores every row of a file with a saved model and writes CSV
//! (to stdout or `--output`): the columns named by `--keep`, then the predicted class and one
//! `probability_<class>` column per class, or the predicted number. Rows with missing
//! predictors are scored (missing values follow each split's stored side); labels training
//! never saw are counted on stderr.

use std::io::Write;
use std::path::PathBuf;

use anyhow::Context;
use spinney_core::binning::Records;
use spinney_core::data::Table;
use spinney_core::model::{Model, Unseen};
use spinney_core::model_file::read_model;
use spinney_core::scoring::{partial_note, unseen_note, PredictionRows};

/// The arguments of `spinney predict`.
#[derive(clap::Args)]
pub struct PredictArgs {
    /// The model file, written by `spinney fit ... --save-model PATH`.
    pub model: PathBuf,
    /// The file of records to score (CSV, TSV, xlsx, ods), with the model's predictors.
    pub file: PathBuf,
    /// Write the predictions here instead of to the standard output.
    #[arg(long, value_name = "PATH")]
    pub output: Option<PathBuf>,
    /// Copy this column (an identifier, say) into the output (repeatable).
    #[arg(long = "keep", value_name = "COLUMN")]
    pub keep: Vec<String>,
}

pub fn predict(args: PredictArgs) -> anyhow::Result<()> {
    let bytes = std::fs::read(&args.model)
        .with_context(|| format!("cannot read the model file {}", args.model.display()))?;
    let model = read_model(&bytes).map_err(|e| anyhow::anyhow!("{}: {e}", args.model.display()))?;
    // Predictors are read as the model read them in training.
    let loaded = crate::fit::read(&args.file, model.reading_kinds())?;
    let table = &loaded.table;
    for name in &args.keep {
        if table.column(name).is_none() {
            anyhow::bail!(
                "{}: --keep {name}: {}",
                args.file.display(),
                spinney_core::Error::new(spinney_core::ErrorKind::NoSuchColumn {
                    name: name.clone(),
                    available: table.columns.iter().map(|c| c.name.clone()).collect(),
                })
            );
        }
    }
    let (records, unseen) = model
        .records(table)
        .map_err(|e| anyhow::anyhow!("{}: {e}", args.file.display()))?;
    // How the file was read (values that could not be read as the model's kinds, say).
    for n in &loaded.notices {
        eprintln!("note: {}: {n}", args.file.display());
    }
    report_unseen(&unseen);
    if let Some(note) = partial_note(&model) {
        eprintln!("note: {note}");
    }
    match &args.output {
        Some(path) => {
            let mut file = std::io::BufWriter::new(
                std::fs::File::create(path)
                    .with_context(|| format!("cannot write {}", path.display()))?,
            );
            write_predictions(&model, table, &records, &args.keep, &mut file)
                .and_then(|()| file.flush())
                .with_context(|| format!("cannot write {}", path.display()))?;
        }
        None => {
            let mut out = std::io::BufWriter::new(std::io::stdout().lock());
            let written = write_predictions(&model, table, &records, &args.keep, &mut out)
                .and_then(|()| out.flush());
            match written {
                // The reader stopped early (`| head`): not an error.
                Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => {}
                other => other?,
            }
        }
    }
    Ok(())
}

/// Tells, on stderr, how many rows hold labels training never saw, per predictor.
pub fn report_unseen(unseen: &[Unseen]) {
    for u in unseen {
        eprintln!("note: {}", unseen_note(u));
    }
}

/// Writes one CSV row per row of `table`: the `keep` columns as the file shows them, then
/// the prediction. Numbers are written in the shortest form that reads back to the same bits.
pub fn write_predictions(
    model: &Model,
    table: &Table,
    records: &Records,
    keep: &[String],
    out: &mut dyn Write,
) -> std::io::Result<()> {
    let mut rows = PredictionRows::new(model, table, records, keep);
    writeln!(out, "{}", PredictionRows::csv_line(&rows.header()))?;
    for row in 0..rows.rows() {
        let fields = rows.fields(row);
        writeln!(out, "{}", PredictionRows::csv_line(&fields))?;
    }
    Ok(())
}

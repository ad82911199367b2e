//! The study file: a notebook of work on one data file, saved as versioned JSON so it can be
//! opened again and re-run to the same results (ARCHITECTURE.md, invariant 5).
//!
//! One JSON object, format version 1:
//!
//! - `format` (`"spinney-study"`), `version` (`{"major": 1, "minor": 2}`), `written_by`;
//! - `data`: the file's name, its SHA-256 `fingerprint`, `rows`, how it was `reading` (sheet,
//!   extra missing-value codes, kinds the user chose), every column's `name`, `kind` and
//!   `role` (outcome, predictor, group, weight, ignore), and only if the user asked for it,
//!   the file itself as base64 (`included`, RFC 4648 with padding);
//! - `runs`: each run's `method`, `outcome`, `predictors`, `weight`, the `settings` the user
//!   gave (every other one is the method's default), the `seed`, whether it was fitted on
//!   `earlier_data` (before the roles or reading changed), its `result` figures, and
//!   optionally its fitted `model` (a model file, see [`crate::model_file`]);
//! - since 1.1, each run's `positive` (optional: the class called positive), and `threshold` (optional): the decision threshold step's choice, the `run`
//!   (1-based, in `runs`), the class called `positive` and the threshold `value`;
//! - since 1.2, a run's `method` may be `baseline` ([`BASELINE`]: the penalised logistic or
//!   ridge regression grown as a run of its own, its one setting `penalty`); such a run has
//!   no `model` (model files hold tree models).
//!
//! The reader accepts any 1.x file (unknown fields skipped), refuses a newer major version,
//! non-JSON, other JSON, cut files and contents that do not hold together (roles, kinds,
//! columns named by runs, non-finite figures, included data whose fingerprint differs,
//! models that are not whole models), each with a message saying what and where. The
//! study holds no rows unless the data is included; its runs' figures and any saved model
//! still describe the data, so keep it with the same care.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use crate::data::Kind;
use crate::envelope::Refusal;
use crate::error::{Error, ErrorKind, Result, Where};
use crate::model::Method;

/// The `format` of every study file.
pub const FORMAT: &str = "spinney-study";
/// The major version written and the newest read.
pub const MAJOR: u64 = 1;
/// The minor version written: additions older 1.x readers can skip.
pub const MINOR: u64 = 2;
/// The `method` of a baseline run (since 1.2; see [`crate::validate::validate_baseline`]).
pub const BASELINE: &str = "baseline";
/// The roles a column can have, as the file spells them.
pub const ROLES: [&str; 5] = ["outcome", "predictor", "group", "weight", "ignore"];

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Version {
    pub major: u64,
    pub minor: u64,
}

/// A whole study (the file's version 1 layout).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Study {
    pub format: String,
    pub version: Version,
    pub written_by: String,
    pub data: StudyData,
    pub runs: Vec<StudyRun>,
    /// The decision threshold step's choice (since 1.1).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub threshold: Option<StudyThreshold>,
}

/// Where the user drew the line in the decision threshold step.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StudyThreshold {
    /// The run, 1-based, in the study's `runs`.
    pub run: usize,
    /// The label of the class called positive.
    pub positive: String,
    /// Records at or above this probability of the positive class are called positive.
    pub value: f64,
}

/// The data file the study was made on, and what the user said about its columns.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StudyData {
    pub file: String,
    /// SHA-256 of the file's bytes, 64 lower-case hex digits.
    pub fingerprint: String,
    pub rows: u64,
    pub reading: StudyReading,
    pub columns: Vec<StudyColumn>,
    /// The file's bytes as base64, only when the user chose to include the data.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub included: Option<String>,
}

/// How the file was read: the settings that change a table (the same file read with other
/// settings gives other columns, so re-runs need them).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct StudyReading {
    #[serde(default)]
    pub sheet: Option<String>,
    /// Extra codes meaning "not recorded".
    #[serde(default)]
    pub missing: Vec<String>,
    /// Kinds the user chose, (column, kind label).
    #[serde(default)]
    pub kinds: Vec<(String, String)>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StudyColumn {
    pub name: String,
    /// A kind label: number, whole number, yes/no, category, date, date-time, text.
    pub kind: String,
    /// One of [`ROLES`].
    pub role: String,
}

/// One model run: enough to fit it again, and the figures it gave.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StudyRun {
    /// tree, bagging, forest, adaboost or boosting.
    pub method: String,
    pub outcome: String,
    pub predictors: Vec<String>,
    #[serde(default)]
    pub weight: Option<String>,
    /// The column keeping each record's group together in grouped folds.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub group: Option<String>,
    /// A two-class outcome's class called positive (the event), when the user chose it
    /// (since 1.1; the command line's `--positive`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub positive: Option<String>,
    /// How the run was judged, in the command line's `--validate` words (`oob`,
    /// `folds:5`, ...); none: not judged.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub validation: Option<String>,
    /// The baseline was judged on the same splits.
    #[serde(default)]
    pub baseline: bool,
    /// The settings the user gave, by the command line's `--set` names.
    pub settings: BTreeMap<String, String>,
    pub seed: u64,
    /// Fitted before the roles or the reading changed: its columns may differ from the
    /// study's, and it is not re-run.
    #[serde(default)]
    pub earlier_data: bool,
    pub result: RunFigures,
    /// The fitted model as a model file's JSON object.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub model: Option<serde_json::Value>,
}

/// What a run reported. Training figures are apparent (the rows it was fitted on).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunFigures {
    /// "error rate" or "mean squared error".
    pub error_name: String,
    pub rows: u64,
    pub predictors: u64,
    /// Trees or rounds.
    pub members: u64,
    pub training_error: f64,
    #[serde(default)]
    pub out_of_bag_error: Option<f64>,
    pub fit_seconds: f64,
}

impl RunFigures {
    /// The same figures to the bit, fit time aside (it is never the same twice).
    pub fn same_as(&self, other: &RunFigures) -> bool {
        self.error_name == other.error_name
            && self.rows == other.rows
            && self.predictors == other.predictors
            && self.members == other.members
            && self.training_error.to_bits() == other.training_error.to_bits()
            && self.out_of_bag_error.map(f64::to_bits) == other.out_of_bag_error.map(f64::to_bits)
    }
}

impl Study {
    /// A study of this Spinney's format version.
    pub fn new(data: StudyData, runs: Vec<StudyRun>) -> Study {
        Study {
            format: FORMAT.into(),
            version: Version {
                major: MAJOR,
                minor: MINOR,
            },
            written_by: format!("spinney {}", crate::VERSION),
            data,
            runs,
            threshold: None,
        }
    }

    /// The included data file's bytes, if the study holds them (already checked against
    /// the fingerprint by [`read_study`]).
    pub fn included_bytes(&self) -> Option<Vec<u8>> {
        self.data
            .included
            .as_deref()
            .and_then(|text| base64_decode(text).ok())
    }

    /// The role of each column by name.
    pub fn role_of(&self, column: &str) -> Option<&str> {
        self.data
            .columns
            .iter()
            .find(|c| c.name == column)
            .map(|c| c.role.as_str())
    }
}

/// The SHA-256 of `bytes` as the study writes it.
pub fn fingerprint(bytes: &[u8]) -> String {
    Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// `bytes` as base64 for [`StudyData::included`].
pub fn include_data(bytes: &[u8]) -> String {
    base64_encode(bytes)
}

fn bad(reason: impl Into<String>) -> Error {
    Error::new(ErrorKind::BadStudyFile {
        at: Where::default(),
        reason: reason.into(),
    })
}

/// Writes `study` as pretty-printed JSON, refusing figures JSON cannot hold.
pub fn write_study(study: &Study) -> Result<String> {
    check(study).map_err(|e| {
        Error::new(ErrorKind::ModelNotSaved {
            reason: format!("the study is not consistent: {e}"),
        })
    })?;
    let mut text = serde_json::to_string_pretty(study).map_err(|e| {
        Error::new(ErrorKind::ModelNotSaved {
            reason: format!("JSON writing of the study failed: {e}"),
        })
    })?;
    text.push('\n');
    Ok(text)
}

/// Reads a study file, refusing (never panicking on) anything that is not a whole,
/// consistent study of a version this Spinney reads.
pub fn read_study(bytes: &[u8]) -> Result<Study> {
    if bytes.iter().all(u8::is_ascii_whitespace) {
        return Err(bad("the file is empty"));
    }
    let value: serde_json::Value =
        serde_json::from_slice(bytes).map_err(|e| bad_json(&e, "it is not a study"))?;
    let others = [(
        crate::model_file::FORMAT,
        "it is a Spinney model file, not a study; open it where models are scored",
    )];
    crate::envelope::check(&value, FORMAT, "study", MAJOR, &others).map_err(|r| match r {
        Refusal::Bad(reason) => bad(reason),
        Refusal::Newer {
            major,
            minor,
            written_by,
        } => Error::new(ErrorKind::NewerStudyFile {
            major,
            minor,
            written_by,
            reads: MAJOR,
        }),
    })?;
    let study: Study = serde_json::from_value(value).map_err(|e| {
        bad(format!(
            "its contents do not fit study format version 1 ({e})"
        ))
    })?;
    check(&study).map_err(bad)?;
    Ok(study)
}

fn bad_json(e: &serde_json::Error, what: &str) -> Error {
    let reason = match e.classify() {
        serde_json::error::Category::Eof => {
            "the file ends before the study is complete (was it cut short while copying?)"
                .to_string()
        }
        serde_json::error::Category::Syntax => format!("it is not valid JSON ({e})"),
        _ => format!("{what} ({e})"),
    };
    Error::new(ErrorKind::BadStudyFile {
        at: Where {
            line: (e.line() > 0).then_some(e.line() as u64),
            column: (e.line() > 0).then(|| e.column().to_string()),
            ..Where::default()
        },
        reason,
    })
}

/// Everything the types do not say: the reasons a study cannot be used.
fn check(study: &Study) -> std::result::Result<(), String> {
    let data = &study.data;
    if data.fingerprint.len() != 64
        || !data
            .fingerprint
            .bytes()
            .all(|b| b.is_ascii_digit() || (b'a'..=b'f').contains(&b))
    {
        return Err(format!(
            "its data fingerprint '{}' is not a SHA-256 (64 hex digits)",
            data.fingerprint
        ));
    }
    let mut names: Vec<&str> = Vec::with_capacity(data.columns.len());
    for (i, c) in data.columns.iter().enumerate() {
        if names.contains(&c.name.as_str()) {
            return Err(format!("column {} ('{}') is named twice", i + 1, c.name));
        }
        names.push(&c.name);
        if Kind::from_label(&c.kind).is_none() {
            return Err(format!(
                "column {} ('{}') has the unknown kind '{}'",
                i + 1,
                c.name,
                c.kind
            ));
        }
        if !ROLES.contains(&c.role.as_str()) {
            return Err(format!(
                "column {} ('{}') has the unknown role '{}' (one of {})",
                i + 1,
                c.name,
                c.role,
                ROLES.join(", ")
            ));
        }
    }
    for role in ["outcome", "group", "weight"] {
        let n = data.columns.iter().filter(|c| c.role == role).count();
        if n > 1 {
            return Err(format!("{n} columns have the role {role}; at most one may"));
        }
    }
    for (column, kind) in &data.reading.kinds {
        if Kind::from_label(kind).is_none() {
            return Err(format!(
                "its reading gives column '{column}' the unknown kind '{kind}'"
            ));
        }
    }
    if let Some(text) = &data.included {
        let bytes = base64_decode(text).map_err(|e| format!("its included data {e}"))?;
        if fingerprint(&bytes) != data.fingerprint {
            return Err(
                "its included data does not match the data fingerprint (was the study edited?)"
                    .into(),
            );
        }
    }
    if let Some(t) = &study.threshold {
        if t.run == 0 || t.run > study.runs.len() {
            return Err(format!(
                "its threshold step names run {}, but it has {} run(s)",
                t.run,
                study.runs.len()
            ));
        }
        if !(t.value > 0.0 && t.value < 1.0) {
            return Err(format!(
                "its decision threshold {} is outside (0, 1)",
                t.value
            ));
        }
    }
    for (i, run) in study.runs.iter().enumerate() {
        let n = i + 1;
        if Method::from_word(&run.method).is_none() && run.method != BASELINE {
            return Err(format!(
                "run {n} has the method '{}', not one of tree, bagging, forest, adaboost, boosting, baseline",
                run.method
            ));
        }
        if run.method == BASELINE && run.model.is_some() {
            return Err(format!(
                "run {n} is a baseline run but holds a model file, which only tree models have"
            ));
        }
        if !run.earlier_data {
            let used = std::iter::once(&run.outcome)
                .chain(&run.predictors)
                .chain(run.weight.iter());
            for name in used {
                if !names.contains(&name.as_str()) {
                    return Err(format!(
                        "run {n} uses the column '{name}', which the study's data does not have"
                    ));
                }
            }
        }
        let r = &run.result;
        for (what, x) in [
            ("training error", Some(r.training_error)),
            ("out-of-bag error", r.out_of_bag_error),
            ("fit time", Some(r.fit_seconds)),
        ] {
            if let Some(x) = x {
                if !x.is_finite() || x < 0.0 {
                    return Err(format!("run {n} has the {what} {x}"));
                }
            }
        }
        if let Some(model) = &run.model {
            let bytes = serde_json::to_vec(model).map_err(|e| e.to_string())?;
            let model = crate::model_file::read_model(&bytes)
                .map_err(|e| format!("run {n}'s saved model: {e}"))?;
            if model.method.word() != run.method || model.outcome != run.outcome {
                return Err(format!(
                    "run {n}'s saved model is a {} model of '{}', but the run is a {} run of '{}'",
                    model.method.word(),
                    model.outcome,
                    run.method,
                    run.outcome
                ));
            }
        }
    }
    Ok(())
}

const BASE64: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";

/// Base64 with padding (RFC 4648, section 4).
fn base64_encode(bytes: &[u8]) -> String {
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk[0],
            *chunk.get(1).unwrap_or(&0),
            *chunk.get(2).unwrap_or(&0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        for k in 0..4 {
            if k <= chunk.len() {
                out.push(BASE64[((n >> (18 - 6 * k)) & 63) as usize] as char);
            } else {
                out.push('=');
            }
        }
    }
    out
}

/// The inverse of [`base64_encode`]; whitespace is skipped, anything else refused.
fn base64_decode(text: &str) -> std::result::Result<Vec<u8>, String> {
    let digits: Vec<u8> = text.bytes().filter(|b| !b.is_ascii_whitespace()).collect();
    if !digits.len().is_multiple_of(4) {
        return Err("is cut short (its base64 length is not a multiple of 4)".into());
    }
    let mut out = Vec::with_capacity(digits.len() / 4 * 3);
    for (q, quad) in digits.chunks(4).enumerate() {
        let last = q + 1 == digits.len() / 4;
        let pad = quad.iter().rev().take_while(|&&b| b == b'=').count();
        if pad > 2 || (pad > 0 && !last) {
            return Err(format!("has misplaced '=' padding near byte {}", 4 * q));
        }
        let mut n = 0u32;
        for (k, &b) in quad.iter().enumerate() {
            let v = if k >= 4 - pad {
                0
            } else {
                BASE64
                    .iter()
                    .position(|&c| c == b)
                    .ok_or_else(|| format!("holds '{}', which is not base64", b as char))?
                    as u32
            };
            n = (n << 6) | v;
        }
        let three = [(n >> 16) as u8, (n >> 8) as u8, n as u8];
        out.extend_from_slice(&three[..3 - pad]);
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn data(bytes: &[u8]) -> StudyData {
        StudyData {
            file: "records.csv".into(),
            fingerprint: fingerprint(bytes),
            rows: 4,
            reading: StudyReading {
                sheet: None,
                missing: vec!["-999".into()],
                kinds: vec![("grade".into(), "category".into())],
            },
            columns: vec![
                StudyColumn {
                    name: "id".into(),
                    kind: "text".into(),
                    role: "group".into(),
                },
                StudyColumn {
                    name: "grade".into(),
                    kind: "category".into(),
                    role: "predictor".into(),
                },
                StudyColumn {
                    name: "y".into(),
                    kind: "yes/no".into(),
                    role: "outcome".into(),
                },
            ],
            included: None,
        }
    }

    fn run() -> StudyRun {
        StudyRun {
            method: "forest".into(),
            outcome: "y".into(),
            predictors: vec!["grade".into()],
            weight: None,
            group: None,
            positive: None,
            validation: Some("oob".into()),
            baseline: true,
            settings: [("trees".to_string(), "50".to_string())].into(),
            seed: 7,
            earlier_data: false,
            result: RunFigures {
                error_name: "error rate".into(),
                rows: 4,
                predictors: 1,
                members: 50,
                // An awkward number: must read back to the same bits.
                training_error: 0.1 + 0.2,
                out_of_bag_error: Some(1.0 / 3.0),
                fit_seconds: 0.25,
            },
            model: None,
        }
    }

    const BYTES: &[u8] = b"id,grade,y\na,1,yes\nb,2,no\nc,1,yes\nd,3,no\n";

    fn study() -> Study {
        let mut d = data(BYTES);
        d.included = Some(include_data(BYTES));
        let mut s = Study::new(d, vec![run()]);
        s.threshold = Some(StudyThreshold {
            run: 1,
            positive: "yes".into(),
            value: 0.15,
        });
        s
    }

    fn refused(text: &str) -> String {
        match read_study(text.as_bytes()) {
            Ok(_) => panic!("accepted: {text}"),
            Err(e) => e.to_string(),
        }
    }

    #[test]
    fn base64_matches_the_rfc_4648_test_vectors() {
        // RFC 4648, section 10.
        for (plain, coded) in [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ] {
            assert_eq!(base64_encode(plain.as_bytes()), coded);
            assert_eq!(base64_decode(coded).unwrap(), plain.as_bytes());
        }
        let all: Vec<u8> = (0..=255u8).collect();
        assert_eq!(base64_decode(&base64_encode(&all)).unwrap(), all);
        assert!(base64_decode("Zm9v!A==")
            .unwrap_err()
            .contains("not base64"));
        assert!(base64_decode("Zg==Zm9v").unwrap_err().contains("padding"));
        assert!(base64_decode("Zm9").unwrap_err().contains("cut short"));
    }

    #[test]
    fn fingerprint_matches_fips_180_4() {
        // FIPS 180-4 example "abc" (NIST CSRC examples, SHA256.pdf).
        assert_eq!(
            fingerprint(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn a_study_reads_back_identical_to_the_bit() {
        let s = study();
        let text = write_study(&s).unwrap();
        let back = read_study(text.as_bytes()).unwrap();
        assert_eq!(back, s);
        assert!(back.runs[0].result.same_as(&s.runs[0].result));
        assert_eq!(back.included_bytes().unwrap(), BYTES);
        assert_eq!(back.role_of("y"), Some("outcome"));
        assert!(text.contains("\"format\": \"spinney-study\""));
    }

    #[test]
    fn a_study_of_version_1_0_without_a_threshold_still_reads() {
        let mut s = study();
        s.threshold = None;
        let text = write_study(&s)
            .unwrap()
            .replace(&format!("\"minor\": {MINOR}"), "\"minor\": 0");
        let back = read_study(text.as_bytes()).unwrap();
        assert_eq!(back.threshold, None);
        assert_eq!(back.runs, s.runs);
    }

    #[test]
    fn a_baseline_run_reads_back_and_version_1_1_still_reads() {
        let mut s = study();
        s.runs[0].method = BASELINE.into();
        s.runs[0].settings = [("penalty".to_string(), "2".to_string())].into();
        let text = write_study(&s).unwrap();
        assert!(text.contains("\"minor\": 2"), "the format's minor version");
        assert_eq!(read_study(text.as_bytes()).unwrap(), s);
        // A 1.1 file (no baseline runs) still reads.
        let old = write_study(&study())
            .unwrap()
            .replace("\"minor\": 2", "\"minor\": 1");
        assert_eq!(read_study(old.as_bytes()).unwrap().runs, study().runs);
    }

    #[test]
    fn figures_differing_in_the_last_bit_are_not_the_same() {
        let a = run().result;
        let mut b = a.clone();
        b.training_error = f64::from_bits(a.training_error.to_bits() + 1);
        assert!(!a.same_as(&b));
        let mut c = a.clone();
        c.fit_seconds = 9.0;
        assert!(a.same_as(&c), "fit time is not a result");
    }

    #[test]
    fn cut_files_are_refused_at_every_length_without_a_panic() {
        let text = write_study(&study()).unwrap();
        let cut_points = (0..text.len()).step_by(7).chain([text.len() - 2]);
        for cut in cut_points {
            let Some(part) = text.get(..cut) else {
                continue;
            };
            if text[cut..].trim().is_empty() {
                continue; // only the closing line break is gone: still a whole study
            }
            let e = refused(part);
            assert!(
                e.contains("study") && (e.contains("cut short") || e.contains("empty")),
                "cut at {cut}: {e}"
            );
        }
    }

    #[test]
    fn newer_other_and_broken_files_say_why() {
        let text = write_study(&study()).unwrap();
        let newer = text.replace("\"major\": 1", "\"major\": 2");
        let e = refused(&newer);
        assert!(
            e.contains(&format!("version 2.{MINOR}")) && e.contains("Update Spinney"),
            "{e}"
        );
        // A newer minor version is read, its unknown fields skipped.
        let minor = text
            .replace(&format!("\"minor\": {MINOR}"), "\"minor\": 9")
            .replacen("\"runs\"", "\"later_field\": [1, 2],\n  \"runs\"", 1);
        assert!(read_study(minor.as_bytes()).is_ok());
        assert!(refused("not json at all").contains("not valid JSON"));
        assert!(refused("[1, 2]").contains("one JSON object"));
        assert!(refused("{\"format\": \"spinney-model\"}").contains("model file, not a study"));
        assert!(refused("{\"format\": \"other\"}").contains("format 'other'"));
        assert!(refused("{\"a\": 1}").contains("no \"format\""));
        assert!(refused("{\"format\": \"spinney-study\"}").contains("\"version\""));
        assert!(refused("   ").contains("empty"));
        let no_runs = text.replacen("\"runs\"", "\"walks\"", 1);
        assert!(refused(&no_runs).contains("missing field `runs`"));
    }

    #[test]
    fn inconsistent_contents_are_refused_by_name() {
        let text = write_study(&study()).unwrap();
        let cases = [
            (
                text.replace("\"role\": \"predictor\"", "\"role\": \"feature\""),
                "unknown role 'feature'",
            ),
            (
                text.replace("\"kind\": \"category\"", "\"kind\": \"colour\""),
                "unknown kind 'colour'",
            ),
            (
                text.replace("\"role\": \"group\"", "\"role\": \"outcome\""),
                "2 columns have the role outcome",
            ),
            (
                text.replace("\"method\": \"forest\"", "\"method\": \"lasso\""),
                "run 1 has the method 'lasso'",
            ),
            (
                text.replace("\"outcome\": \"y\"", "\"outcome\": \"z\""),
                "run 1 uses the column 'z'",
            ),
            (
                text.replacen(&fingerprint(BYTES)[..8], "00000000", 1),
                "included data does not match",
            ),
            (
                text.replacen(&fingerprint(BYTES), "abc", 1),
                "not a SHA-256",
            ),
            (
                text.replace("\"fit_seconds\": 0.25", "\"fit_seconds\": -1.0"),
                "run 1 has the fit time -1",
            ),
            (
                text.replace("\"run\": 1,", "\"run\": 4,"),
                "names run 4, but it has 1 run(s)",
            ),
            (
                text.replace("\"value\": 0.15", "\"value\": 1.5"),
                "threshold 1.5 is outside (0, 1)",
            ),
        ];
        for (changed, want) in cases {
            let e = refused(&changed);
            assert!(e.contains(want), "wanted '{want}' in: {e}");
            assert!(e.contains("study"), "{e}");
        }
    }

    #[test]
    fn a_saved_model_must_be_a_whole_model_of_the_run() {
        use crate::data::{read_table, ReadOptions};
        use crate::design::{build_design, DesignSpec};
        use crate::model::{predictors_of, Ensemble, Model};
        let table = read_table(BYTES, &ReadOptions::default(), &mut crate::progress::Silent)
            .unwrap()
            .table;
        let spec = DesignSpec {
            outcome: "y".into(),
            predictors: vec!["grade".into()],
            ..DesignSpec::default()
        };
        let design = build_design(&table, &spec).unwrap();
        let binned =
            crate::binning::bin_design(&design, crate::binning::BinSettings::default()).unwrap();
        let (stats, width) = design.row_statistics(false);
        let rows: Vec<u32> = (0..binned.rows as u32).collect();
        let tree = crate::tree::grower::grow(
            &binned,
            &stats,
            width,
            &rows,
            &crate::tree::grower::GrowSettings::default(),
            None,
        );
        let model = Model {
            method: Method::Forest,
            outcome: "y".into(),
            classes: Some(vec!["no".into(), "yes".into()]),
            predictors: predictors_of(&design, &binned),
            ensemble: Ensemble::Tree(tree),
            settings: BTreeMap::new(),
            seed: 7,
            training_fingerprint: Some(fingerprint(BYTES)),
            training_rows: 4,
            partial: false,
        };
        let mut s = study();
        s.runs[0].method = "tree".into();
        let mut tree_model = model.clone();
        tree_model.method = Method::Tree;
        let file = crate::model_file::write_model(&tree_model).unwrap();
        s.runs[0].model = Some(serde_json::from_str(&file).unwrap());
        let text = write_study(&s).unwrap();
        assert_eq!(read_study(text.as_bytes()).unwrap(), s);
        // Another method's model, and a damaged model, are refused naming the run.
        let e = refused(&text.replacen("\"method\": \"tree\"", "\"method\": \"bagging\"", 1));
        assert!(e.contains("run 1's saved model is a tree model"), "{e}");
        let e = refused(&text.replacen("\"left\": [", "\"left\": [99, ", 1));
        assert!(e.contains("run 1's saved model"), "{e}");
    }
}

//! Messages between the page and its worker. Explicit, versioned structs (ARCHITECTURE.md,
//! invariant 5); a side that receives a newer major version refuses it with a message.
//!
//! A message is a JS object `{ msg, bytes? }`: `msg` is one of the enums below converted by
//! serde-wasm-bindgen, `bytes` an optional `Uint8Array` (the file, transferred, not copied).

use serde::{Deserialize, Serialize};
use spinney_core::data::TableReport;
use spinney_core::validate::FoldRun;

/// Bumped when a message changes incompatibly.
pub const PROTOCOL_VERSION: u32 = 5;

/// Rows of the preview table.
pub const PREVIEW_ROWS: usize = 20;

/// Files above this size are refused in the page, before a byte is read (the tab would run
/// out of memory holding the file and its table); the command line has no limit.
pub const MAX_FILE_BYTES: u64 = 1_500_000_000;

/// Settings for reading a file, as the page lets the user choose them.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
pub struct ReadSettings {
    pub sheet: Option<String>,
    pub missing: Vec<String>,
    /// (column, kind label) pairs chosen by the user.
    pub kinds: Vec<(String, String)>,
}

/// From the page to the worker.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Request {
    /// Read the file whose bytes come with the message.
    Read {
        v: u32,
        id: u32,
        name: String,
        settings: ReadSettings,
    },
    /// Read the file held by the worker again with other settings (a chosen kind, sheet or
    /// missing-value token).
    Reread {
        v: u32,
        id: u32,
        settings: ReadSettings,
    },
    /// Fit a model on the table the worker holds.
    Fit {
        v: u32,
        id: u32,
        design: FitDesign,
        /// `tree`, `bagging`, `forest`, `adaboost` or `boosting` (the command line's
        /// `--method` words), or `baseline` (its one setting `penalty`).
        method: String,
        /// (name, value) pairs by the command line's `--set` names; the rest keep the
        /// method's defaults.
        settings: Vec<(String, String)>,
        /// How to judge the run (`None`: training figures only).
        judging: Option<Judging>,
    },
    /// Fit trees `first .. first + count` of a bagged ensemble or forest on the table the
    /// worker holds (one worker's share); answered by [`Reply::Part`] with the trees as bytes.
    FitPart {
        v: u32,
        id: u32,
        design: FitDesign,
        method: String,
        settings: Vec<(String, String)>,
        first: usize,
        count: usize,
    },
    /// The checks of a design before any fit (step 2): answered by [`Reply::Warnings`].
    Warnings { v: u32, id: u32, design: FitDesign },
    /// Fit and judge splits `share`, `share + of`, `share + 2·of`, … of `judging`'s splits
    /// (one extra worker's share of a cross-validation, holdout or bootstrap) on the table
    /// the worker holds; answered by [`Reply::Folds`].
    FoldPart {
        v: u32,
        id: u32,
        design: FitDesign,
        method: String,
        settings: Vec<(String, String)>,
        judging: Judging,
        share: usize,
        of: usize,
    },
    /// Every split's fit of run `id`'s judging, in split order, done by extra workers: the
    /// `Fit` or `Assemble` of the same id that follows judges with them instead of fitting
    /// the splits again (the same fits, so the same figures).
    FoldRuns { v: u32, id: u32, runs: Vec<FoldRun> },
    /// Make the forest of `Fit`'s fields from trees fitted by several workers, whose bytes
    /// (every share in tree order, joined) come with the message; answered like `Fit`.
    Assemble {
        v: u32,
        id: u32,
        design: FitDesign,
        method: String,
        settings: Vec<(String, String)>,
        judging: Option<Judging>,
    },
    /// The per-row predictions of a kept two-class run (see [`RunPredictions`]).
    Predictions { v: u32, id: u32, run: u32 },
    /// The user removed kept run `run`: the worker drops its model and judged predictions
    /// (the other runs keep their numbers). No answer.
    Forget { v: u32, id: u32, run: u32 },
    /// The kept runs' models as model files (`None` asks for nothing in that place).
    ModelFiles {
        v: u32,
        id: u32,
        runs: Vec<Option<u32>>,
    },
    /// Score the file whose bytes come with the message with kept run `run`, copying the
    /// `keep` columns (those the file has) in front of the predictions.
    Score {
        v: u32,
        id: u32,
        run: u32,
        name: String,
        keep: Vec<String>,
    },
    /// Insight into kept run `run` on the table it was fitted on (see [`Insight`]): the
    /// importance of every predictor when `importance`, partial dependence and ICE curves on
    /// `predictor`, the contributions of table row `record` (from 0), and a picture of its
    /// first tree when `tree`.
    Explain {
        v: u32,
        id: u32,
        run: u32,
        importance: bool,
        predictor: Option<String>,
        record: Option<usize>,
        tree: bool,
    },
}

/// Predictions for a file of new records (see spinney_core::scoring).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ScoreResult {
    pub run: u32,
    pub file: String,
    pub rows: usize,
    /// The predictions as CSV, header first: what `spinney predict` writes.
    pub csv: String,
    pub header: Vec<String>,
    /// The first rows' fields, for showing.
    pub preview: Vec<Vec<String>>,
    /// How the file was read, labels training never saw, a partial model.
    pub notes: Vec<String>,
    /// What the `top_N_amount` columns measure (see [`Contribution`]).
    pub contribution_scale: String,
}

/// One predictor's contribution to one record's prediction (TreeSHAP), on the scale stated
/// beside it; `value` is the record's value of the predictor in words.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Contribution {
    pub predictor: String,
    pub value: String,
    pub amount: f64,
}

/// Insight into one run, on the table it was fitted on; each part only when asked for.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Insight {
    pub run: u32,
    /// The model's predictors, in its order.
    pub predictors: Vec<String>,
    /// The table's rows (records are numbered from 1 to this).
    pub rows: usize,
    pub importance: Option<InsightImportance>,
    pub dependence: Option<InsightDependence>,
    pub contributions: Option<InsightContributions>,
    pub tree: Option<InsightTree>,
    /// A baseline run's coefficients (shown instead of the trees' importance and pictures).
    #[serde(default)]
    pub coefficients: Option<InsightCoefficients>,
    pub notes: Vec<String>,
}

/// A baseline run's coefficients on its prepared columns (numbers standardised, one 0/1
/// column per category level and per predictor with missing values).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct InsightCoefficients {
    /// What one unit of a coefficient means, in a sentence.
    pub scale: String,
    /// The name of each coefficient row: "log-odds of 'yes'", a class, or the outcome.
    pub outputs: Vec<String>,
    pub intercepts: Vec<f64>,
    /// (model column, one coefficient per row), largest first (by the first row's size).
    pub terms: Vec<(String, Vec<f64>)>,
    pub penalty: f64,
}

/// Importance three ways (spinney_core::explain::importance).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct InsightImportance {
    /// Impurity importance per predictor (sums to 1) and its caution.
    pub impurity: Vec<f64>,
    pub impurity_caution: String,
    /// Permutation importance on the rows described by `rows_words`: the figure watched,
    /// its value on the rows as they are, shuffles per predictor and their seed, and per
    /// predictor the mean loss and its standard deviation over the shuffles.
    pub metric: String,
    pub baseline: f64,
    pub repeats: usize,
    pub seed: u64,
    pub rows: usize,
    pub rows_words: String,
    pub mean: Vec<f64>,
    pub spread: Vec<f64>,
    /// Bagging and forests: out-of-bag permutation importance (Breiman 2001), per predictor
    /// the mean increase in each tree's error on its own out-of-bag rows and its standard
    /// error over the trees.
    pub out_of_bag: Option<OutOfBagImportance>,
    /// Runs judged by holdout, k-fold or grouped folds (not bagging or forests): permutation
    /// importance on held-out records, the judging's splits refitted
    /// (spinney_core::explain::held_out).
    #[serde(default)]
    pub held_out: Option<HeldOutImportance>,
    /// Why a run that is not bagging or a forest has no held-out figure (not judged, or
    /// judged by bootstrap).
    #[serde(default)]
    pub held_out_missing: Option<String>,
}

/// Permutation importance on held-out records: where ("on held-out records, 5 folds"), the
/// splits refitted, shuffles per split and their seed, the figure's mean over the splits as
/// the records are, and per predictor the mean loss and its standard deviation over splits ×
/// shuffles.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct HeldOutImportance {
    pub words: String,
    pub splits: usize,
    pub repeats: usize,
    pub seed: u64,
    pub baseline: f64,
    pub mean: Vec<f64>,
    pub spread: Vec<f64>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct OutOfBagImportance {
    pub error: String,
    pub trees: usize,
    pub mean: Vec<f64>,
    pub standard_error: Vec<f64>,
}

/// Partial dependence on one predictor with ICE curves, on a sample of the rows.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct InsightDependence {
    pub predictor: String,
    /// What the curves show, e.g. "probability of 'yes'".
    pub output: String,
    /// A number predictor (grid values rising) or levels.
    pub numbers: bool,
    pub values: Vec<f64>,
    pub labels: Vec<String>,
    /// Rows of the sample nearest each grid value, and rows without a value.
    pub counts: Vec<u64>,
    pub missing: u64,
    /// The sample's values of the predictor (numbers), for the counts under the chart.
    pub data: Vec<f64>,
    /// The mean prediction at each grid value.
    pub average: Vec<f64>,
    /// Table rows (from 0) followed by the ICE curves, and each one's predictions.
    pub ice_rows: Vec<usize>,
    pub ice: Vec<Vec<f64>>,
    /// Rows in the sample, and the seed that drew it.
    pub sample: usize,
    pub seed: u64,
}

/// One record's contributions (TreeSHAP), largest in size first.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct InsightContributions {
    /// The table row (from 0).
    pub record: usize,
    /// The scale in a sentence and the output explained, e.g. "probability of 'yes'".
    pub scale: String,
    pub output: String,
    pub base: f64,
    pub contributions: Vec<Contribution>,
    /// The model's own sum for the record on that scale (what base + contributions equal).
    pub sum: f64,
    /// The model's prediction for the record in words (class and probabilities to four
    /// decimals, or the number), the predicted class, if any, and the prediction unrounded
    /// (one probability per class, or the number).
    pub prediction: String,
    pub predicted_class: Option<String>,
    #[serde(default)]
    pub predicted: Vec<f64>,
}

/// One tree drawn as boxes (the chart's `TreeNode`s), with a summary for big ones.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct InsightTree {
    /// Which tree it is, in words ("the single tree", "the first of 300 trees").
    pub which: String,
    pub nodes: Vec<TreeNodeView>,
    pub depth: usize,
    pub leaves: usize,
    /// The predictors split on most often in it (name, splits), most first.
    pub most_used: Vec<(String, usize)>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct TreeNodeView {
    pub feature: String,
    pub threshold: String,
    pub left: Option<usize>,
    pub right: Option<usize>,
    pub value: String,
}

/// The per-row predictions of a two-class run, for the threshold step.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct RunPredictions {
    pub run: u32,
    /// The outcome's two labels, codes 0 and 1.
    pub classes: [String; 2],
    /// Each row's outcome code.
    pub outcomes: Vec<u32>,
    /// Each row's probability of class 1.
    pub probabilities: Vec<f64>,
    /// How the rows were judged, in words (e.g. "5-fold cross-validation", "out-of-bag
    /// records"): each row's prediction comes from a model that did not learn from it.
    /// `None`: the training rows' own predictions (apparent, not a validation).
    pub judged_by: Option<String>,
    /// Rows without an out-of-sample prediction (every tree saw them; never held out), left out.
    pub left_out: usize,
}

/// The columns of a fit, as the page's roles table gives them.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct FitDesign {
    pub outcome: String,
    pub predictors: Vec<String>,
    pub weight: Option<String>,
    /// The column holding each record's group (patient, site), for grouped folds and the
    /// repeated-record warning.
    #[serde(default)]
    pub group: Option<String>,
    /// A two-class outcome's class called positive (the event); `None`: the second label.
    #[serde(default)]
    pub positive: Option<String>,
}

/// How a run is judged: a validation scheme in the command line's words (`oob`,
/// `holdout:0.2`, `folds:5`, `folds:10:5`, `groups:5:COLUMN`, `bootstrap:200`), the
/// two-class threshold, and whether the baseline is judged on the same splits.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Judging {
    pub scheme: String,
    pub threshold: f64,
    pub baseline: bool,
    pub seed: u64,
}

/// One figure with its 95% interval, where it has one.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Figure {
    pub name: String,
    pub value: f64,
    pub low: Option<f64>,
    pub high: Option<f64>,
}

/// A calibration group: its predictions' range and mean, its share of events with a 95%
/// Wilson interval, and its rows.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CalibrationGroup {
    pub lowest: f64,
    pub highest: f64,
    pub mean_predicted: f64,
    pub observed: f64,
    pub low: f64,
    pub high: f64,
    pub rows: u64,
}

/// What the validation of a run found (out-of-sample figures only; the training figures of
/// [`RunResult`] are apparent).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunValidation {
    /// The scheme in words.
    pub scheme: String,
    pub judged_rows: usize,
    pub figures: Vec<Figure>,
    /// The baseline (L2 logistic or ridge regression) on the same splits.
    pub baseline_name: String,
    pub baseline: Option<Vec<Figure>>,
    /// Two classes: ROC points (false-positive rate, true-positive rate), the baseline's too.
    pub roc: Vec<(f64, f64)>,
    pub baseline_roc: Vec<(f64, f64)>,
    pub calibration: Vec<CalibrationGroup>,
    /// The smoothed calibration curve (predicted, observed).
    pub smoothed: Vec<(f64, f64)>,
    /// Out-of-sample event probabilities counted in twentieths.
    pub histogram: Vec<u64>,
    /// Net benefit by threshold: (threshold, model, treat all).
    pub decision: Vec<(f64, f64, f64)>,
    /// Out-of-sample error after 1, 2, ... trees or rounds, where the scheme gives it.
    pub error_by_size: Vec<f64>,
    /// Computed warnings about the data and the scheme.
    pub warnings: Vec<String>,
    pub notes: Vec<String>,
}

/// What a finished fit reports. Training figures are apparent (the rows the model was
/// fitted on), never a validation.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct RunResult {
    /// The run's number in the worker's list of fitted models.
    pub run: u32,
    pub method: String,
    pub outcome: String,
    pub rows: usize,
    pub predictors: usize,
    /// "error rate" (classes) or "mean squared error" (numbers).
    pub error_name: String,
    /// Trees (bagging, forest), rounds (AdaBoost) or 1 (a single tree).
    pub members: usize,
    /// "trees" or "rounds".
    pub member_name: String,
    /// Apparent error on the training rows with every member, and after 1, 2, ... members.
    pub training_error: f64,
    pub training_curve: Vec<f64>,
    /// Out-of-bag error (bagging and forests), and after 1, 2, ... trees.
    pub oob_error: Option<f64>,
    pub oob_curve: Vec<f64>,
    /// AdaBoost: each round's weighted training error, and why it stopped.
    pub round_errors: Vec<f64>,
    pub stop: Option<String>,
    /// A single tree's depth and leaves.
    pub tree_shape: Option<(usize, usize)>,
    /// Binning and fitting, not reading.
    pub fit_seconds: f64,
    /// The worker's wasm memory after the fit (it never shrinks, so this is its peak).
    pub worker_memory_bytes: u64,
    /// The out-of-sample judgement, when asked for and possible.
    pub validation: Option<RunValidation>,
    /// Why the run could not be judged as asked (the model itself is kept).
    pub validation_refused: Option<String>,
    pub notices: Vec<String>,
}

/// The first rows of a table, as text (`None` = missing).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Preview {
    pub rows: Vec<Vec<Option<String>>>,
}

/// From the worker to the page.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Reply {
    /// Sent once when the worker's wasm has loaded; the page sends nothing before it.
    Ready { v: u32 },
    Progress {
        id: u32,
        stage: String,
        done: u64,
        total: u64,
    },
    Table {
        id: u32,
        name: String,
        report: Box<TableReport>,
        preview: Preview,
        settings: ReadSettings,
        /// Seconds the worker spent reading, and the size of its wasm memory afterwards
        /// (wasm memory never shrinks, so this is its peak).
        read_seconds: f64,
        worker_memory_bytes: u64,
    },
    /// A fit finished.
    Fitted { id: u32, result: Box<RunResult> },
    /// A run's per-row predictions.
    Predictions {
        id: u32,
        result: Box<RunPredictions>,
    },
    /// Model files in the order asked, `None` where the worker holds no such run.
    ModelFiles { id: u32, files: Vec<Option<String>> },
    /// A file of new records scored.
    Scored { id: u32, result: Box<ScoreResult> },
    /// Insight into a run.
    Explained { id: u32, result: Box<Insight> },
    /// A share of a forest's trees is fitted; its bytes come with the message.
    Part { id: u32, first: usize, count: usize },
    /// The checks of a design computed from the records (sample size, leakage, identifiers,
    /// imbalance, repeated records), or why no model can be grown on it.
    Warnings {
        id: u32,
        warnings: Vec<String>,
        refused: Option<String>,
        /// A two-class outcome's labels; the second is the class every figure treats as
        /// the event (code 1).
        #[serde(default)]
        classes: Option<[String; 2]>,
    },
    /// One extra worker's share of a judging's splits: (split index, its fit), and how many
    /// splits the scheme has in all.
    Folds {
        id: u32,
        share: usize,
        count: usize,
        runs: Vec<(usize, FoldRun)>,
    },
    /// The request failed; the worker still holds the table it had before, if any.
    Failed {
        id: u32,
        message: String,
        kept_previous: bool,
    },
}

impl Request {
    pub fn version(&self) -> u32 {
        match self {
            Request::Read { v, .. }
            | Request::Reread { v, .. }
            | Request::Fit { v, .. }
            | Request::Predictions { v, .. }
            | Request::Forget { v, .. }
            | Request::Score { v, .. }
            | Request::ModelFiles { v, .. }
            | Request::FitPart { v, .. }
            | Request::Assemble { v, .. }
            | Request::FoldPart { v, .. }
            | Request::Warnings { v, .. }
            | Request::FoldRuns { v, .. }
            | Request::Explain { v, .. } => *v,
        }
    }
}

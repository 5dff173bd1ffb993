//! The optional linfa integration (the `linfa` feature): the four families —
//! logistic regression, naive Bayes, LDA and QDA — behind linfa's
//! [`Fit`] and [`PredictInplace`] traits, so a linfa user can fit them on a
//! [`linfa::DatasetBase`] and predict labels or posteriors with
//! [`linfa::traits::Predict`]. linfa itself has no LDA or QDA.
//!
//! This module owns only the translation: linfa's records (every column
//! numeric, `NaN` is missing) and `usize` labels into a
//! [`crate::data::Dataset`], and the model's classes back into the
//! caller's label numbering. The fit and the scoring are the library's own
//! ([`crate::model::fit`], [`ModelFile::log_posteriors`]), so a model fitted
//! here gives the posteriors of the same model fitted on the same values
//! read from a file.
//!
//! Labels are indices 0..K into the class names ([`BayesRule::classes()`],
//! default `"0"`, `"1"`, …). The library keeps classes in byte order of
//! their names; predictions and posterior columns come back in the
//! caller's label order all the same.
//!
//! The fitted model predicts two kinds of target, so say which one you
//! want with a type annotation:
//!
//! ```
//! use baserate::interop::BayesRule;
//! use baserate::model::discriminant::LdaParams;
//! use baserate::model::FamilyParams;
//! use linfa::traits::{Fit, Predict};
//! use ndarray::{array, Array1, Array2};
//!
//! // Invented applicants: (income in £10k, debt-to-income ratio); label 1 defaulted.
//! let records = array![
//!     [2.0, 0.90],
//!     [2.4, 0.80],
//!     [1.8, 1.10],
//!     [2.1, 0.70],
//!     [5.0, 0.30],
//!     [5.5, 0.20],
//!     [4.8, 0.40],
//!     [5.2, 0.35],
//! ];
//! let labels: Array1<usize> = array![1, 1, 1, 1, 0, 0, 0, 0];
//! let training = linfa::Dataset::new(records, labels);
//! let model = BayesRule::new(FamilyParams::Lda(LdaParams::default()))
//!     .classes(["repaid", "defaulted"])
//!     .fit(&training)?;
//!
//! let applicants = array![[2.2, 0.85], [5.1, 0.30]];
//! let predicted: Array1<usize> = model.predict(&applicants);
//! assert_eq!(predicted.to_vec(), vec![1, 0]);
//! // Rows × classes, columns in label order: column 1 is "defaulted".
//! let posteriors: Array2<f64> = model.predict(&applicants);
//! assert!(posteriors[(0, 1)] > 0.5 && posteriors[(1, 0)] > 0.5);
//! # Ok::<(), baserate::Error>(())
//! ```

use linfa::dataset::{AsSingleTargets, DatasetBase};
use linfa::traits::{Fit, PredictInplace};
use ndarray::{s, Array1, Array2, ArrayBase, ArrayView2, Data, Ix2};

use crate::apply::arrays::inputs_from_arrays;
use crate::apply::UnseenPolicy;
use crate::data::{ColumnDescription, DataNotice, Dataset, LabelledArrays, ReadOptions};
use crate::error::{Error, Result};
use crate::model::FamilyParams;
use crate::train::file::{ModelFile, TrainingInfo};

/// The name the label column takes inside the model file.
const TARGET_NAME: &str = "class";

/// linfa's errors, for [`Fit`] (whose error type must convert from them).
impl From<linfa::Error> for Error {
    fn from(error: linfa::Error) -> Self {
        Error::Usage(error.to_string())
    }
}

/// The hyperparameters of one family, used as linfa's parameters: fit it
/// with [`Fit::fit`] on a dataset of `f64` records and `usize` labels.
#[derive(Debug, Clone, PartialEq)]
pub struct BayesRule {
    /// The family and its hyperparameters.
    pub params: FamilyParams,
    /// The class names of the labels 0..K, in label order (see
    /// [`BayesRule::classes()`]); `None` names them `"0"`, `"1"`, … up to
    /// the largest label in the data.
    pub classes: Option<Vec<String>>,
}

impl BayesRule {
    /// A family with its hyperparameters, its classes named by their labels.
    pub fn new(params: FamilyParams) -> Self {
        BayesRule { params, classes: None }
    }

    /// Names the classes: `names[i]` is the class of label `i`. They must
    /// be distinct; a label with no name is an error when fitting, and a
    /// named class with no rows is one the family cannot fit.
    pub fn classes<S: Into<String>>(mut self, names: impl IntoIterator<Item = S>) -> Self {
        self.classes = Some(names.into_iter().map(Into::into).collect());
        self
    }
}

impl<D, T> Fit<ArrayBase<D, Ix2>, T, Error> for BayesRule
where
    D: Data<Elem = f64>,
    T: AsSingleTargets<Elem = usize>,
{
    type Object = FittedBayesRule;

    /// Fits the family on the dataset's records (every column numeric,
    /// named `x0`, `x1`, …; a `NaN` is an error, as the library's default
    /// missing-value policy has it), its labels and its sample weights (as
    /// frequency weights) if it has any.
    fn fit(&self, dataset: &DatasetBase<ArrayBase<D, Ix2>, T>) -> Result<FittedBayesRule> {
        let records = dataset.records();
        let labels: Vec<usize> = dataset.targets().as_single_targets().iter().copied().collect();
        let classes = match &self.classes {
            Some(names) => names.clone(),
            None => {
                let count = labels.iter().max().map_or(0, |&largest| largest + 1);
                (0..count).map(|label| label.to_string()).collect()
            }
        };
        let columns: Vec<ColumnDescription> =
            (0..records.ncols()).map(|j| ColumnDescription::numeric(format!("x{j}"))).collect();
        let weights: Option<Vec<f64>> = dataset.weights().map(|w| w.iter().map(|&x| f64::from(x)).collect());
        let arrays = LabelledArrays {
            features: records.view(),
            columns: &columns,
            target_name: TARGET_NAME,
            classes: &classes,
            target: &labels,
            weights: weights.as_deref(),
        };
        // from_arrays rejects a label with no class, and duplicate names.
        let (training, notices) = Dataset::from_arrays(&arrays, &ReadOptions::new(TARGET_NAME))?;
        let (model, diagnostics) = crate::model::fit(&training, &self.params)?;
        let target = &training.schema.target;
        let info = TrainingInfo {
            input_path: crate::data::arrays::ARRAYS_PATH.into(),
            input_sha256: String::new(),
            rows: training.rows(),
            class_counts: target.counts.clone(),
            weighted_class_counts: target.weighted_counts.clone(),
        };
        let file =
            ModelFile::builder(self.params.clone(), training.schema.clone(), model, diagnostics, info).build()?;
        // The file keeps its classes in byte order of their names; map each
        // back to the caller's label by name.
        let label_of_class = file
            .classes
            .iter()
            .map(|name| {
                classes.iter().position(|c| c == name).ok_or_else(|| {
                    Error::Usage(format!("the fitted model has class '{name}', which is not one of the given classes"))
                })
            })
            .collect::<Result<Vec<usize>>>()?;
        Ok(FittedBayesRule { file, columns, label_of_class, notices })
    }
}

/// A family fitted through linfa: the library's model file, and the map
/// from its classes back to the caller's labels.
#[derive(Debug, Clone)]
pub struct FittedBayesRule {
    /// The model file, as the command line would write it (classes in
    /// byte order of their names; see [`FittedBayesRule::class_names`] for
    /// label order). [`ModelFile::save`] writes it for `baserate score`.
    pub file: ModelFile,
    /// What the data layer noticed about the records (a constant column,
    /// say): the notes the command line prints when it reads a file.
    pub notices: Vec<DataNotice>,
    columns: Vec<ColumnDescription>,
    /// For each class of `file`, in its order: the caller's label.
    label_of_class: Vec<usize>,
}

impl FittedBayesRule {
    /// The class names in label order: entry `i` names label `i`.
    pub fn class_names(&self) -> Vec<&str> {
        let mut names = vec![""; self.label_of_class.len()];
        for (class, &label) in self.label_of_class.iter().enumerate() {
            names[label] = self.file.classes[class].as_str();
        }
        names
    }

    /// The posterior of every class for each record, at the model's prior
    /// (the training class mix): rows × K, columns in label order. An
    /// error names the first record that cannot be scored (a `NaN` or an
    /// infinite value) or a matrix of the wrong width.
    pub fn posteriors(&self, records: ArrayView2<'_, f64>) -> Result<Array2<f64>> {
        let data = inputs_from_arrays(&self.file, records, &self.columns, None, UnseenPolicy::Error)?;
        let log_posteriors = self.file.log_posteriors(&data.inputs(), &self.file.prior);
        let mut posteriors = Array2::zeros((records.nrows(), self.label_of_class.len()));
        for (r, row) in log_posteriors.rows().into_iter().enumerate() {
            for (class, &log_p) in row.iter().enumerate() {
                posteriors[(r, self.label_of_class[class])] = log_p.exp();
            }
        }
        Ok(posteriors)
    }

    /// Posteriors for linfa, which takes no errors from a prediction: a
    /// record that cannot be scored gets a row of `NaN`, the others their
    /// posteriors (records are scored one by one only when the batch fails).
    fn posteriors_or_nan(&self, records: ArrayView2<'_, f64>) -> Array2<f64> {
        if let Ok(posteriors) = self.posteriors(records) {
            return posteriors;
        }
        let mut posteriors = Array2::from_elem((records.nrows(), self.label_of_class.len()), f64::NAN);
        for (r, mut row) in posteriors.rows_mut().into_iter().enumerate() {
            if let Ok(one) = self.posteriors(records.slice(s![r..r + 1, ..])) {
                row.assign(&one.row(0));
            }
        }
        posteriors
    }
}

/// Predicted labels: each record's most probable class at the model's
/// prior (ties to the lower label). A record the model cannot score (a
/// `NaN` or an infinite value, or a matrix of the wrong width) gets
/// `usize::MAX`, since linfa's predictions cannot return an error; use
/// [`FittedBayesRule::posteriors`] to have the error instead.
///
/// # Panics
///
/// If `y` does not have one entry per record (as
/// [`PredictInplace::default_target`] gives it).
impl<D: Data<Elem = f64>> PredictInplace<ArrayBase<D, Ix2>, Array1<usize>> for FittedBayesRule {
    fn predict_inplace<'a>(&'a self, x: &'a ArrayBase<D, Ix2>, y: &mut Array1<usize>) {
        assert_eq!(x.nrows(), y.len(), "the number of records must match the number of targets");
        let posteriors = self.posteriors_or_nan(x.view());
        for (label, row) in y.iter_mut().zip(posteriors.rows()) {
            let mut best: Option<(usize, f64)> = None;
            for (k, &p) in row.iter().enumerate() {
                // Strictly greater: a tie keeps the lower label.
                if !p.is_nan() && best.is_none_or(|(_, top)| p > top) {
                    best = Some((k, p));
                }
            }
            *label = best.map_or(usize::MAX, |(k, _)| k);
        }
    }

    fn default_target(&self, x: &ArrayBase<D, Ix2>) -> Array1<usize> {
        Array1::zeros(x.nrows())
    }
}

/// Predicted posteriors: rows × K, columns in label order, each row
/// summing to 1. A record the model cannot score (a `NaN` or an infinite
/// value, or a matrix of the wrong width) gets a row of `NaN`, since
/// linfa's predictions cannot return an error; use
/// [`FittedBayesRule::posteriors`] to have the error instead.
///
/// # Panics
///
/// If `y` is not records × classes (as
/// [`PredictInplace::default_target`] gives it).
impl<D: Data<Elem = f64>> PredictInplace<ArrayBase<D, Ix2>, Array2<f64>> for FittedBayesRule {
    fn predict_inplace<'a>(&'a self, x: &'a ArrayBase<D, Ix2>, y: &mut Array2<f64>) {
        let shape = (x.nrows(), self.label_of_class.len());
        assert_eq!(y.dim(), shape, "the targets must be records × classes");
        y.assign(&self.posteriors_or_nan(x.view()));
    }

    fn default_target(&self, x: &ArrayBase<D, Ix2>) -> Array2<f64> {
        Array2::zeros((x.nrows(), self.label_of_class.len()))
    }
}

//! The model file: versioned JSON holding everything needed to score and
//! to audit a fit — the schema, the family and its parameters, the prior in
//! use and the training class mix, fit diagnostics, and training metadata
//! (rows, class counts, SHA-256 of the input, tool version, creation time).
//!
//! Loading validates everything and rejects a corrupt, truncated or newer
//! file with a message that says which; writing is atomic.
//!
//! ## Integrity
//! From format version 2 a file carries `checksum`: `sha256:` and the
//! SHA-256 of its canonical form — the content serialised as compact JSON
//! in the format's field order, without the checksum itself, numbers in
//! shortest round-trip form. Loading checks the format version, then the
//! checksum, then consistency. Layout changes (spacing, `1.50` for `1.5`)
//! keep the checksum, since the model is unchanged; any changed value, or a
//! field the format does not have, is an edit, refused unless the caller
//! accepts it. Version 1 files carry no checksum and still load, with
//! [`Integrity::NoChecksum`] for the caller to warn about.

use std::path::Path;

use serde::{Deserialize, Serialize};

use crate::data::Schema;
use crate::error::{Error, Result};
use crate::model::{Diagnostics, Family, FamilyParams, FittedModel};
use crate::prior::spec::PRIOR_SUM_TOLERANCE;

/// The format name every model file carries.
pub const FORMAT: &str = "baserate-model";
/// The format version this build writes, and the newest it reads
/// (2: the checksum).
pub const FORMAT_VERSION: u32 = 2;

/// The largest model file read: 256 MiB, refused before parsing. The
/// largest models are QDA's covariance matrices, one per class: ten classes
/// of 1,000 numeric inputs come to about 10⁷ numbers, some 200 MB of JSON,
/// far past any scorecard or fraud model (common practice: tens to a few
/// hundred inputs). A larger file is not a model a fit wrote.
pub const MAX_MODEL_BYTES: u64 = 256 << 20;

/// The memory a model file may take while it loads: this many times its
/// size, plus a fixed allowance.
#[derive(Debug, Clone, Copy)]
pub struct LoadMemory {
    /// Times the file's size.
    pub per_byte: u64,
    /// Bytes on top.
    pub fixed: u64,
}

impl LoadMemory {
    /// The bound for a file of `size` bytes.
    pub fn bound(self, size: u64) -> u64 {
        self.per_byte * size + self.fixed
    }
}

/// Loading takes at most four times the file's size plus 50 MB: the bytes
/// themselves, and the typed model, whose bound the first pass computes
/// before anything is built (a file that would take more is refused). The
/// files baserate writes take well under twice their size.
pub const MAX_LOAD_MEMORY: LoadMemory = LoadMemory { per_byte: 4, fixed: 50_000_000 };

/// How a loaded model file stands against its checksum.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Integrity {
    /// The content matches the checksum.
    Verified,
    /// A file of format version 1, written before files carried a checksum.
    NoChecksum,
    /// The content does not match its checksum (or a version 2 file has
    /// none), and the caller accepted the edit.
    EditAccepted,
}

impl Integrity {
    /// The name written in summaries (`verified`, `no-checksum`,
    /// `edit-accepted`).
    pub fn name(self) -> &'static str {
        match self {
            Integrity::Verified => "verified",
            Integrity::NoChecksum => "no-checksum",
            Integrity::EditAccepted => "edit-accepted",
        }
    }

    /// What a user should be told, if anything.
    pub fn warning(self, path: &str) -> Option<String> {
        match self {
            Integrity::Verified => None,
            Integrity::NoChecksum => Some(format!(
                "{path} is a model file of format version 1, which carries no checksum, so edits to it cannot be detected; fit it again to get a file that can be checked"
            )),
            Integrity::EditAccepted => Some(format!(
                "{path} has been edited since it was fitted, and is used because the edit was accepted"
            )),
        }
    }
}

/// Where the model came from.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TrainingInfo {
    /// The training file as named on the command line.
    pub input_path: String,
    /// SHA-256 of the training file's bytes.
    pub input_sha256: String,
    /// Rows used.
    pub rows: usize,
    /// Rows per class.
    pub class_counts: Vec<usize>,
    /// Weighted rows per class (`--weight`, before class weights).
    pub weighted_class_counts: Vec<f64>,
}

/// A model file's whole content.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ModelFile {
    /// Always [`FORMAT`].
    pub format: String,
    /// The format version ([`FORMAT_VERSION`] when written by this build).
    pub format_version: u32,
    /// The baserate version that wrote it.
    pub tool_version: String,
    /// When it was written (RFC 3339, UTC).
    pub created: String,
    /// The family.
    pub family: Family,
    /// The hyperparameters used.
    pub params: FamilyParams,
    /// The training file's schema; scoring checks new files against it.
    pub schema: Schema,
    /// The classes, as written in the data, in byte order.
    pub classes: Vec<String>,
    /// The event class.
    pub positive: String,
    /// The prior applied when scoring without `--prior`: the fit-time
    /// `--prior` (default: the training class mix).
    pub prior: Vec<f64>,
    /// The weighted class shares of the training rows (after `--weight` and
    /// any class weights): the class mix logistic posteriors are
    /// calibrated to.
    pub training_class_mix: Vec<f64>,
    /// Where it came from.
    pub training: TrainingInfo,
    /// How the fit went.
    pub diagnostics: Diagnostics,
    /// The fitted parameters.
    pub model: FittedModel,
    /// Sampling rates of the classes in the training data (`--sampled`):
    /// the population class mix is the training mix divided by them,
    /// renormalised (Dal Pozzolo, Caelen, Johnson & Bontempi 2015).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sampling_rates: Option<Vec<f64>>,
    /// A calibration map fitted on out-of-fold predictions (`--calibrate`),
    /// applied to the log odds of the positive class at the calibrated-to
    /// class mix, before any prior correction.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calibration: Option<crate::model::calibration::CalibrationMap>,
    /// Out-of-fold predictions of the training rows, summarised (for
    /// black-box shift estimation).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub held_out: Option<HeldOut>,
    /// The training rows' distribution, binned, for drift checks when
    /// scoring (absent in files written before it was kept).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub drift_reference: Option<crate::model::drift::DriftReference>,
    /// A logistic fit from in-engine aggregates: where its Newton steps
    /// stand, for the next query's step.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub newton: Option<crate::model::logistic_aggregates::NewtonState>,
    /// `sha256:` and the hash of the canonical form (see the module
    /// documentation); set when the file is written, checked when loaded.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub checksum: Option<String>,
}

/// What out-of-fold predictions of the training rows showed.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HeldOut {
    /// Folds used.
    pub folds: usize,
    /// Weighted share of training rows predicted class i (the most probable
    /// class at the calibrated-to class mix) with true class j:
    /// `confusion[i][j]`.
    pub confusion: Vec<Vec<f64>>,
    /// Mean out-of-fold posterior of each class.
    pub mean_posterior: Vec<f64>,
}

/// Assembles a [`ModelFile`]: the one place a model file is made, whether
/// from a file's rows ([`crate::train::train`]) or from aggregates. The
/// format fields, the tool version and the creation time are filled in,
/// the classes and the positive class come from the schema, and the file
/// is validated when built.
#[derive(Debug, Clone)]
pub struct ModelFileBuilder {
    file: ModelFile,
}

impl ModelFile {
    /// A builder for a model file of the fitted `model`, its hyperparameters
    /// and its training schema. The prior and the training class mix
    /// default to the schema's class mix (for logistic regression, the
    /// mix its posteriors are calibrated to).
    pub fn builder(
        params: FamilyParams,
        schema: Schema,
        model: FittedModel,
        diagnostics: Diagnostics,
        training: TrainingInfo,
    ) -> ModelFileBuilder {
        let class_mix = match &model {
            FittedModel::Logistic(m) => m.class_mix.clone(),
            _ => schema.target.class_mix(),
        };
        ModelFileBuilder {
            file: ModelFile {
                format: FORMAT.to_string(),
                format_version: FORMAT_VERSION,
                tool_version: env!("CARGO_PKG_VERSION").to_string(),
                created: crate::io::utc_timestamp(),
                family: params.family(),
                params,
                classes: schema.target.classes.clone(),
                positive: schema.target.positive.clone(),
                schema,
                prior: class_mix.clone(),
                training_class_mix: class_mix,
                training,
                diagnostics,
                model,
                held_out: None,
                calibration: None,
                sampling_rates: None,
                drift_reference: None,
                newton: None,
                checksum: None,
            },
        }
    }
}

impl ModelFileBuilder {
    /// The prior applied when scoring without another.
    pub fn prior(mut self, prior: Vec<f64>) -> Self {
        self.file.prior = prior;
        self
    }

    /// The class mix of the training rows (as weighted for the fit).
    pub fn training_class_mix(mut self, mix: Vec<f64>) -> Self {
        self.file.training_class_mix = mix;
        self
    }

    /// The classes' sampling rates in the training data.
    pub fn sampling_rates(mut self, rates: Vec<f64>) -> Self {
        self.file.sampling_rates = Some(rates);
        self
    }

    /// The calibration map.
    pub fn calibration(mut self, map: crate::model::calibration::CalibrationMap) -> Self {
        self.file.calibration = Some(map);
        self
    }

    /// The summary of out-of-fold predictions.
    pub fn held_out(mut self, held_out: HeldOut) -> Self {
        self.file.held_out = Some(held_out);
        self
    }

    /// The training distribution for drift checks.
    pub fn drift_reference(mut self, reference: crate::model::drift::DriftReference) -> Self {
        self.file.drift_reference = Some(reference);
        self
    }

    /// Where a fit from aggregates' Newton steps stand.
    pub fn newton(mut self, state: crate::model::logistic_aggregates::NewtonState) -> Self {
        self.file.newton = Some(state);
        self
    }

    /// The model file, checked for consistency.
    pub fn build(self) -> Result<ModelFile> {
        self.check()?;
        Ok(self.file)
    }

    /// Checks the file built so far for consistency.
    pub fn check(&self) -> Result<()> {
        let family = self.file.family;
        self.file
            .validate()
            .map_err(|message| Error::FitFailed { family: family.name().into(), message: message.into() })
    }

    /// The file built so far, as it stands (checked only by
    /// [`ModelFileBuilder::check`] and [`ModelFileBuilder::build`]).
    pub fn draft(&self) -> &ModelFile {
        &self.file
    }
}

impl ModelFile {
    /// Where the positive class stands in [`ModelFile::classes`].
    pub fn positive_index(&self) -> usize {
        crate::data::schema::positive_index(&self.classes, &self.positive)
    }

    /// The class mix the model's posteriors are calibrated to: the prior
    /// for the class-conditional families, the training class mix for
    /// logistic regression.
    pub fn calibrated_to(&self) -> &[f64] {
        if self.family.is_class_conditional() {
            &self.prior
        } else {
            &self.training_class_mix
        }
    }

    /// Per numeric model input, the largest |x| the model scores (see
    /// [`crate::model::range`]): beyond it a row is `out-of-range`.
    pub fn input_bounds(&self) -> Vec<f64> {
        let slope = match &self.calibration {
            Some(crate::model::calibration::CalibrationMap::Platt { a, .. }) => a.abs(),
            _ => 1.0,
        };
        crate::model::range::input_bounds(&self.model, slope)
    }

    /// Log posteriors of the rows under `prior`: the model's posteriors at
    /// the class mix it is calibrated to, then the calibration map (if any),
    /// then the odds correction to `prior` — the order fit → calibrate →
    /// correct the prior.
    pub fn log_posteriors(&self, inputs: &crate::data::Inputs<'_>, prior: &[f64]) -> ndarray::Array2<f64> {
        let base = self.calibrated_to().to_vec();
        let mut lp = self.model.log_posteriors(inputs, &base);
        let k = self.classes.len();
        let positive = self.positive_index();
        if let Some(values) = lp.as_slice_mut() {
            for row in values.chunks_mut(k) {
                if let (Some(map), 2) = (&self.calibration, k) {
                    let z = row[positive] - row[1 - positive];
                    let p = map.apply(z).clamp(1e-300, 1.0 - 1e-16);
                    row[positive] = p.ln();
                    row[1 - positive] = (-p).ln_1p();
                }
                crate::prior::correct_row(row, &base, prior);
            }
        }
        lp
    }

    /// Serialises to pretty JSON, with the checksum of the content.
    pub fn to_json(&self) -> Result<String> {
        let failed = |e: serde_json::Error| Error::FitFailed {
            family: self.family.name().into(),
            message: format!("the model could not be written as JSON: {e}").into(),
        };
        let mut signed = self.clone();
        signed.checksum = None;
        signed.checksum = Some(signed.content_checksum().map_err(failed)?);
        serde_json::to_string_pretty(&signed).map_err(failed)
    }

    /// `sha256:` and the SHA-256 of the canonical form: compact JSON of
    /// everything but the checksum (which must be `None` here).
    fn content_checksum(&self) -> std::result::Result<String, serde_json::Error> {
        let mut hashing = crate::train::checksum::Hashing::new();
        serde_json::to_writer(&mut hashing, self)?;
        Ok(hashing.finish())
    }

    /// Writes the file atomically.
    pub fn save(&self, path: &Path) -> Result<()> {
        let mut text = self.to_json()?;
        text.push('\n');
        crate::io::write_atomic(path, text.as_bytes())
    }

    /// Reads and validates a model file, refusing one edited since it was
    /// written; a file of the earlier format, without a checksum, loads
    /// (use [`ModelFile::open`] to learn which).
    pub fn load(path: &Path) -> Result<ModelFile> {
        ModelFile::open(path, false).map(|(file, _)| file)
    }

    /// Reads and validates a model file, and says how it stands against its
    /// checksum; `accept_edited` loads a file whose content was changed
    /// since it was written. A file over [`MAX_MODEL_BYTES`] is refused
    /// before it is parsed.
    pub fn open(path: &Path, accept_edited: bool) -> Result<(ModelFile, Integrity)> {
        use std::io::Read;
        let shown = path.display().to_string();
        let too_large = || Error::ModelFile {
            path: shown.clone(),
            message: format!(
                "the file is larger than {} MiB, more than any model holds; it is not a model file as fitted",
                MAX_MODEL_BYTES >> 20
            ),
        };
        let file = std::fs::File::open(path).map_err(|e| Error::io(&shown, e))?;
        if file.metadata().is_ok_and(|m| m.is_file() && m.len() > MAX_MODEL_BYTES) {
            return Err(too_large());
        }
        let mut bytes = Vec::new();
        file.take(MAX_MODEL_BYTES + 1).read_to_end(&mut bytes).map_err(|e| Error::io(&shown, e))?;
        if bytes.len() as u64 > MAX_MODEL_BYTES {
            return Err(too_large());
        }
        ModelFile::from_bytes(&shown, &bytes, accept_edited)
    }

    /// Reads a costs file for this model: its classes, and no categorical
    /// input used as an amount.
    pub fn read_costs(&self, path: &Path) -> Result<crate::decide::CostSpec> {
        let shown = path.display().to_string();
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(&shown, e))?;
        let spec = crate::decide::CostSpec::parse(&shown, &text, &self.classes)?;
        self.check_cost_columns(&spec, &shown)?;
        Ok(spec)
    }

    /// Refuses costs that read a column this model holds as categorical
    /// (an amount must be numeric); `shown` names the file in the error.
    pub fn check_cost_columns(&self, spec: &crate::decide::CostSpec, shown: &str) -> Result<()> {
        let categorical = self.schema.categorical_inputs();
        match spec.columns().into_iter().find(|c| categorical.iter().any(|k| k.name == *c)) {
            Some(c) => Err(Error::SchemaMismatch {
                path: shown.to_string(),
                message: format!("the costs use column '{c}', which the model reads as categorical, not numeric")
                    .into(),
            }),
            None => Ok(()),
        }
    }

    /// Parses and validates model JSON, refusing an edited file; `path` is
    /// only used in messages.
    pub fn from_json(path: &str, text: &str) -> Result<ModelFile> {
        ModelFile::from_bytes(path, text.as_bytes(), false).map(|(file, _)| file)
    }

    /// Parses model JSON in two passes. The first streams through the
    /// bytes keeping almost nothing: the format and its version, the
    /// checksum against the canonical form, and a bound on the memory the
    /// content would take. An edited file, or one packed more densely than
    /// [`MAX_LOAD_MEMORY`] allows, is refused there. The second builds the
    /// typed model straight from the bytes, then checks its consistency.
    pub fn from_bytes(path: &str, bytes: &[u8], accept_edited: bool) -> Result<(ModelFile, Integrity)> {
        let bad = |message: String| Error::ModelFile { path: path.to_string(), message };
        let scan = crate::train::checksum::scan(bytes).map_err(|e| {
            if e.is_eof() {
                bad(format!("the model file is truncated (it ends at line {}, column {})", e.line(), e.column()))
            } else if e.is_data() && e.line() <= 1 && e.column() <= 1 {
                bad(format!("not a baserate model file (no \"format\": \"{FORMAT}\")"))
            } else {
                bad(format!("not a valid model file: {e}"))
            }
        })?;
        if scan.format.as_deref() != Some(FORMAT) {
            return Err(bad(format!("not a baserate model file (no \"format\": \"{FORMAT}\")")));
        }
        let version = scan.format_version.unwrap_or(0);
        if version > u64::from(FORMAT_VERSION) {
            return Err(bad(format!(
                "the model file has format version {version}, written by a newer baserate; this build ({}) reads up to version {FORMAT_VERSION}",
                env!("CARGO_PKG_VERSION")
            )));
        }
        if version == 0 {
            return Err(bad("the model file has no valid format_version".into()));
        }
        let edited = |detail: &str| {
            if accept_edited {
                Ok(Integrity::EditAccepted)
            } else {
                Err(Error::EditedModel { path: path.to_string(), detail: detail.to_string() })
            }
        };
        let integrity = match (&scan.checksum, version) {
            (None, 1) => Integrity::NoChecksum,
            (None, _) => {
                edited("the model file has no checksum, though every file of its format version is written with one")?
            }
            (Some(written), _) if *written == scan.digest => Integrity::Verified,
            (Some(_), _) => edited("the model file's content does not match its checksum")?,
        };
        let size = bytes.len() as u64;
        if size + scan.memory_bound() > MAX_LOAD_MEMORY.bound(size) {
            return Err(bad(format!(
                "the file holds {} values in {} bytes, packed more densely than any model file baserate writes; it is not a model as fitted",
                scan.scalars + scan.strings + scan.containers,
                size
            )));
        }
        let file: ModelFile =
            serde_json::from_slice(bytes).map_err(|e| bad(format!("the model file is corrupt: {e}")))?;
        file.validate().map_err(|m| bad(format!("the model file is corrupt: {m}")))?;
        Ok((file, integrity))
    }

    /// Checks internal consistency.
    pub fn validate(&self) -> std::result::Result<(), String> {
        let k = self.classes.len();
        if k < 2 {
            return Err("fewer than two classes".into());
        }
        if self.schema.target.classes != self.classes {
            return Err("the classes do not match the schema's".into());
        }
        if self.schema.target.positive != self.positive {
            return Err("the positive class does not match the schema's".into());
        }
        if !self.classes.contains(&self.positive) {
            return Err(format!("the positive class '{}' is not one of the classes", self.positive));
        }
        for (name, mix) in [("prior", &self.prior), ("training_class_mix", &self.training_class_mix)] {
            if mix.len() != k || mix.iter().any(|p| !(*p > 0.0 && *p < 1.0)) {
                return Err(format!("{name} must give every class a probability strictly between 0 and 1"));
            }
            if (mix.iter().sum::<f64>() - 1.0).abs() > PRIOR_SUM_TOLERANCE {
                return Err(format!("{name} does not sum to 1"));
            }
        }
        if self.model.family() != self.family || self.params.family() != self.family {
            return Err("the family fields disagree".into());
        }
        if let Some(c) = &self.calibration {
            c.validate()?;
            if k != 2 {
                return Err("a calibration map needs two classes".into());
            }
        }
        if let Some(h) = &self.held_out {
            if h.confusion.len() != k || h.confusion.iter().any(|r| r.len() != k) || h.mean_posterior.len() != k {
                return Err("the held-out summary has the wrong number of classes".into());
            }
        }
        if self.model.classes() != k {
            return Err("the fitted parameters have the wrong number of classes".into());
        }
        let encoding = crate::model::design::Encoding::from_schema(&self.schema);
        let matches = match &self.model {
            FittedModel::Logistic(m) => m.encoding == encoding,
            FittedModel::Lda(m) | FittedModel::Qda(m) => m.full_encoding() == encoding,
            FittedModel::NaiveBayes(m) => {
                m.numeric == encoding.numeric
                    && m.categorical.len() == encoding.one_hot.len()
                    && m.categorical
                        .iter()
                        .zip(&encoding.one_hot)
                        .all(|(c, h)| c.column == h.column && c.levels == h.levels)
            }
        };
        if !matches {
            return Err("the fitted parameters do not match the schema's inputs".into());
        }
        match &self.model {
            FittedModel::Logistic(m) => m.validate(),
            FittedModel::NaiveBayes(m) => m.validate(),
            FittedModel::Lda(m) | FittedModel::Qda(m) => m.validate(),
        }
    }
}

//! The governance header every HTML report opens with: what was run (the
//! command line), when, by which baserate, on which bytes (each input's
//! SHA-256), with which options, and what went wrong on the way (every
//! warning, every candidate that failed). A validator can rerun the report
//! from it and check they hold the same files.

use std::path::Path;

use crate::data::DataNotice;
use crate::error::{Result, SettingNames};
use crate::evaluate::compare::{ComparisonRequest, JudgeRequest, StudyOptions};
use crate::report::evaluation::escape;

/// The header's facts, gathered before the report is written.
#[derive(Debug, Clone, Default)]
pub struct ReportHeader {
    /// The command line as run, each argument quoted where a shell needs it.
    pub command_line: String,
    /// When the report was made: UTC, ISO 8601.
    pub generated: String,
    /// Each input's path and SHA-256 (hex).
    pub inputs: Vec<(String, String)>,
    /// The options in force, defaults included: (name, value).
    pub options: Vec<(String, String)>,
    /// Every warning and note printed on the way.
    pub warnings: Vec<String>,
}

impl ReportHeader {
    /// The header for `arguments` (the program's own arguments, program
    /// name first) over the `inputs` given (hashed here), with the
    /// `notices` reading the data gave among its warnings (settings named
    /// by `names`). The time is now, or
    /// `SOURCE_DATE_EPOCH` when set (the reproducible-builds convention;
    /// [`crate::io::utc_timestamp`]), so that the same inputs and seed can
    /// give the same bytes.
    pub fn new(
        arguments: &[String],
        inputs: &[Option<&Path>],
        options: Vec<(String, String)>,
        notices: &[DataNotice],
        names: SettingNames<'_>,
    ) -> Result<ReportHeader> {
        let hashed = inputs
            .iter()
            .flatten()
            .map(|path| Ok((path.display().to_string(), crate::io::sha256_file(path)?)))
            .collect::<Result<Vec<_>>>()?;
        Ok(ReportHeader {
            command_line: arguments.iter().map(|a| shell_quoted(a)).collect::<Vec<_>>().join(" "),
            generated: crate::io::utc_timestamp(),
            inputs: hashed,
            options,
            warnings: notices.iter().map(|n| n.describe(names)).collect(),
        })
    }

    /// The header as HTML; `failed` lists candidates that failed and why.
    pub fn html(&self, failed: &[(String, String)]) -> String {
        let row = |name: &str, value: &str| {
            format!("<tr><th class=\"l\">{}</th><td class=\"l\">{}</td></tr>\n", escape(name), value)
        };
        let mut html = String::from("<section class=\"governance\"><h2>Provenance</h2>\n<table class=\"header\">\n");
        html.push_str(&row("command", &format!("<code>{}</code>", escape(&self.command_line))));
        html.push_str(&row("made", &escape(&self.generated)));
        html.push_str(&row("baserate", &escape(env!("CARGO_PKG_VERSION"))));
        for (path, digest) in &self.inputs {
            html.push_str(&row(&format!("input {path}"), &format!("SHA-256 <code>{}</code>", escape(digest))));
        }
        html.push_str("</table>\n<h3>Options in force</h3>\n<table class=\"options\">\n");
        for (name, value) in &self.options {
            html.push_str(&row(name, &escape(value)));
        }
        html.push_str("</table>\n<h3>Warnings</h3>\n");
        if self.warnings.is_empty() {
            html.push_str("<p>none</p>\n");
        } else {
            html.push_str("<ul class=\"warnings\">\n");
            for w in &self.warnings {
                html.push_str(&format!("<li>{}</li>\n", escape(w)));
            }
            html.push_str("</ul>\n");
        }
        html.push_str("<h3>Failed families</h3>\n");
        if failed.is_empty() {
            html.push_str("<p>none</p>\n");
        } else {
            html.push_str("<ul class=\"failed\">\n");
            for (name, reason) in failed {
                html.push_str(&format!("<li><strong>{}</strong>: {}</li>\n", escape(name), escape(reason)));
            }
            html.push_str("</ul>\n");
        }
        html.push_str("</section>\n");
        html
    }
}

impl StudyOptions {
    /// The options in force, for a report's header.
    pub fn settings(&self) -> Vec<(String, String)> {
        let mut out = vec![
            ("seed".to_string(), self.seed.to_string()),
            (
                "bootstrap draws".to_string(),
                self.bootstrap.map_or_else(
                    || "200 up to 200,000 tested rows, else the normal interval".into(),
                    |b| b.to_string(),
                ),
            ),
        ];
        let optional = |name: &str, value: Option<String>| (name.to_string(), value.unwrap_or_else(|| "none".into()));
        out.push(optional("amount column", self.amount.clone()));
        out.push(optional("segments by", self.by.clone()));
        out.push(optional(
            "target class mix",
            self.target_prior.as_ref().map(|p| serde_json::to_string(p).unwrap_or_default()),
        ));
        out.push(optional("costs", self.costs.as_ref().map(|p| p.display().to_string())));
        out
    }
}

impl ComparisonRequest {
    /// The options in force, for a report's header: the split, the study's
    /// options, and each candidate's full settings (defaults included).
    pub fn settings(&self) -> Vec<(String, String)> {
        use crate::evaluate::compare::SplitChoice;
        let split = match &self.split {
            SplitChoice::KFold { folds, repeats: 1 } => format!("{folds}-fold stratified cross-validation"),
            SplitChoice::KFold { folds, repeats } => {
                format!("{folds}-fold stratified cross-validation, repeated {repeats} times")
            }
            SplitChoice::Holdout { test_fraction } => format!("stratified holdout of {test_fraction} of the rows"),
            SplitChoice::OutOfTime { column, test_from, gap_from } => format!(
                "out of time on '{column}': tested from {test_from}{}",
                gap_from.as_ref().map_or_else(String::new, |g| format!(", training before {g}"))
            ),
            SplitChoice::TrainThenTest { description, .. } => description.clone(),
        };
        let mut out = vec![("split".to_string(), split)];
        out.extend(self.options.settings());
        for c in &self.candidates {
            let mut value = option_words(&serde_json::to_value(&c.params).unwrap_or_default());
            if let Some(calibration) = &c.calibration {
                value.push_str(&format!("; calibrated: {calibration:?}"));
            }
            out.push((format!("family {}", c.name), value));
        }
        out
    }
}

impl JudgeRequest {
    /// The options in force, for a report's header: how the scores are
    /// read, and the study's options.
    pub fn settings(&self) -> Vec<(String, String)> {
        let mut out = vec![
            ("scores".to_string(), self.scores.join(", ")),
            ("score scale".to_string(), format!("{:?}", self.scale)),
            ("lower scores mean positive".to_string(), self.lower_positive.to_string()),
            ("train prior".to_string(), self.train_prior.map_or_else(|| "none".into(), |p| p.to_string())),
        ];
        out.extend(self.options.settings());
        out
    }
}

/// A family's settings in the command line's words: `name=value`, the
/// model file's older field names mapped to the flags that set them.
fn option_words(params: &serde_json::Value) -> String {
    let Some(fields) = params.as_object() else { return params.to_string() };
    fields
        .iter()
        .filter(|(key, _)| key.as_str() != "family")
        .map(|(key, value)| {
            let name = match key.as_str() {
                "l2" => "newton-ridge".to_string(),
                "class_weight" => "reweight".to_string(),
                "shrinkage" => "diagonal-weight".to_string(),
                "reg" => "pooled-weight".to_string(),
                "divisor" => "covariance-divisor".to_string(),
                "categories" => "category-model".to_string(),
                "cv_seed" => "cv-seed".to_string(),
                other => other.replace('_', "-"),
            };
            let shown = match value {
                serde_json::Value::String(text) => text.clone(),
                other => other.to_string(),
            };
            format!("{name}={shown}")
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// An argument as a POSIX shell would need it written.
fn shell_quoted(argument: &str) -> String {
    let plain = !argument.is_empty()
        && argument.chars().all(|c| c.is_ascii_alphanumeric() || "-_./=:,+@%".contains(c) || !c.is_ascii());
    if plain {
        argument.to_string()
    } else {
        format!("'{}'", argument.replace('\'', "'\\''"))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Known instants: the epoch, a leap day, and one from `date -u -d @…`.
    #[test]
    fn timestamps_are_civil_utc() {
        use crate::io::utc_timestamp_at;
        assert_eq!(utc_timestamp_at(0), "1970-01-01T00:00:00Z");
        assert_eq!(utc_timestamp_at(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(utc_timestamp_at(1_796_346_197), "2026-12-04T01:03:17Z");
        assert_eq!(utc_timestamp_at(-1), "1969-12-31T23:59:59Z");
    }

    #[test]
    fn arguments_are_quoted_where_a_shell_needs_it() {
        assert_eq!(shell_quoted("--folds"), "--folds");
        assert_eq!(shell_quoted("qda:pooled-weight=0.2"), "qda:pooled-weight=0.2");
        assert_eq!(shell_quoted("my file.csv"), "'my file.csv'");
        assert_eq!(shell_quoted("it's"), "'it'\\''s'");
        assert_eq!(shell_quoted(""), "''");
    }
}

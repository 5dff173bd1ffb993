//! A model's schema applied to rows: the header checked against the
//! schema, what each field feeds, the fills for missing and unseen values,
//! and the reasons a row is set aside. The streaming scoring job, the SQL
//! export and whole-file reading for `shift` ([`in_memory`]) all take these
//! rules from here (the first two stand on the floor above).
//!
//! - [`plan`]: the header checked against the schema before any row is read;
//! - [`row`]: records turned into model inputs, or set aside with a reason;
//! - [`in_memory`]: a whole file read against a training schema;
//! - [`arrays`]: rows held as arrays, by the same plan and fills.

pub mod arrays;
pub mod in_memory;
pub mod plan;
pub mod row;

/// What to do with a category the training data never had.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum UnseenPolicy {
    /// Stop the run, naming the line.
    #[default]
    Error,
    /// Set the row aside in the reject file.
    Reject,
    /// Take it as a missing value (filled as the model fills those).
    Missing,
}

impl UnseenPolicy {
    /// Every policy, in the order they are listed.
    pub const ALL: [UnseenPolicy; 3] = [UnseenPolicy::Error, UnseenPolicy::Reject, UnseenPolicy::Missing];

    /// The policy's name: `error`, `reject` or `missing`.
    pub fn name(self) -> &'static str {
        match self {
            UnseenPolicy::Error => "error",
            UnseenPolicy::Reject => "reject",
            UnseenPolicy::Missing => "missing",
        }
    }
}

impl std::str::FromStr for UnseenPolicy {
    type Err = String;

    fn from_str(text: &str) -> std::result::Result<Self, String> {
        UnseenPolicy::ALL
            .into_iter()
            .find(|p| p.name() == text)
            .ok_or_else(|| format!("'{text}' is not a policy for unseen categories (error, reject or missing)"))
    }
}

/// Why a row was set aside.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RejectReason {
    /// The row has more or fewer fields than the header.
    FieldCount,
    /// A quoted field is not closed, or text follows its closing quote.
    Quoting,
    /// A field the output carries is not valid UTF-8.
    Encoding,
    /// A numeric feature's value is not a number.
    NotANumber,
    /// A numeric feature's value is `inf` or `nan`.
    NotFinite,
    /// A numeric feature's value is so far from the training data that the
    /// model's evidence would pass the largest double (see
    /// [`crate::model::range`]).
    OutOfRange,
    /// A categorical feature has a level the training data never had.
    UnseenCategory,
    /// A missing value the model cannot fill.
    MissingValue,
    /// A cost column's value is missing or not a finite number.
    CostValue,
    /// The record runs past the record-size cap without ending.
    RecordSize,
}

impl RejectReason {
    /// Every reason, in the order the summary lists them.
    pub const ALL: [RejectReason; 10] = [
        RejectReason::FieldCount,
        RejectReason::Quoting,
        RejectReason::Encoding,
        RejectReason::NotANumber,
        RejectReason::NotFinite,
        RejectReason::OutOfRange,
        RejectReason::UnseenCategory,
        RejectReason::MissingValue,
        RejectReason::CostValue,
        RejectReason::RecordSize,
    ];

    /// The reason's name in the reject file and the summary.
    pub fn name(self) -> &'static str {
        match self {
            RejectReason::FieldCount => "field-count",
            RejectReason::Quoting => "quoting",
            RejectReason::Encoding => "encoding",
            RejectReason::NotANumber => "not-a-number",
            RejectReason::NotFinite => "not-finite",
            RejectReason::OutOfRange => "out-of-range",
            RejectReason::UnseenCategory => "unseen-category",
            RejectReason::MissingValue => "missing-value",
            RejectReason::CostValue => "cost-value",
            RejectReason::RecordSize => "record-size",
        }
    }
}

//! The missing-value policies, roles and kinds, through the library.

use baserate::data::csv_read::read_bytes;
use baserate::data::schema::{ColumnKind, ColumnRole, Imputation, PositiveRule};
use baserate::data::{Dataset, MissingPolicy, ReadOptions};

fn dataset(text: &str, options: &ReadOptions) -> (Dataset, Vec<String>) {
    let table = read_bytes("d.csv", text.as_bytes(), options).expect("read");
    let (d, notices) = Dataset::from_table(table, options).expect("dataset");
    (d, notices.into_iter().map(|n| n.to_string()).collect())
}

const TEXT: &str = "id,x,c,w,y\nr1,1,a,1,good\nr2,,b,2,bad\nr3,3,,1,good\nr4,5,a,0.5,good\n";

#[test]
fn impute_uses_the_median_an_indicator_and_a_missing_level() {
    let mut options = ReadOptions::new("y");
    options.ids = vec!["id".into()];
    options.weight = Some("w".into());
    options.missing = MissingPolicy::Impute;
    let (d, notices) = dataset(TEXT, &options);
    assert_eq!(d.rows(), 4);
    assert_eq!(d.schema.numeric_inputs(), vec!["x", "x_is_missing"]);
    // The median of 1, 3, 5 is 3.
    assert_eq!(d.numeric.column(0).to_vec(), vec![1.0, 3.0, 3.0, 5.0]);
    assert_eq!(d.numeric.column(1).to_vec(), vec![0.0, 1.0, 0.0, 0.0]);
    let c = &d.schema.columns[2];
    assert_eq!(c.imputation, Some(Imputation::Level { level: "<missing>".into() }));
    assert_eq!(
        c.categorical.as_ref().map(|s| s.levels.clone()),
        Some(vec!["a".into(), "b".into(), "<missing>".into()])
    );
    assert_eq!(d.categorical[0], vec![0, 1, 2, 0]);
    assert_eq!(d.weights, Some(vec![1.0, 2.0, 1.0, 0.5]));
    assert_eq!(d.ids[0].1, vec!["r1", "r2", "r3", "r4"]);
    assert!(notices.iter().any(|n| n.contains("set to the median 3")));
    // Weighted class mix: bad 2 of 4.5.
    let t = &d.schema.target;
    assert_eq!(t.classes, vec!["bad", "good"]);
    assert_eq!(t.weighted_counts, vec![2.0, 2.5]);
    assert_eq!((t.positive.as_str(), t.positive_rule), ("bad", PositiveRule::Minority));
}

#[test]
fn drop_rows_reports_what_it_dropped() {
    let mut options = ReadOptions::new("y");
    options.ids = vec!["id".into()];
    options.exclude = vec!["w".into()];
    options.missing = MissingPolicy::DropRows;
    let (d, notices) = dataset(&TEXT.replace("r4,5,a,0.5,good", "r4,5,a,0.5,bad"), &options);
    assert_eq!(d.rows(), 2);
    assert_eq!(d.schema.rows_dropped, 2);
    assert_eq!(d.ids[0].1, vec!["r1", "r4"]);
    assert_eq!(d.numeric.column(0).to_vec(), vec![1.0, 5.0]);
    assert!(notices.iter().any(|n| n.contains("2 of 4 rows dropped")));
    assert_eq!(d.schema.columns[3].role, ColumnRole::Excluded);
}

#[test]
fn declared_kinds_override_inference() {
    let mut options = ReadOptions::new("y");
    options.categorical = vec!["code".into()];
    let (d, _) = dataset("code,y\n1,a\n2,b\n1,a\n", &options);
    assert_eq!(d.schema.columns[0].kind, Some(ColumnKind::Categorical));
    assert_eq!(d.schema.categorical_inputs()[0].categorical.as_ref().map(|c| c.levels.len()), Some(2));
}

#[test]
fn custom_missing_tokens_and_delimiters() {
    let mut options = ReadOptions::new("y");
    options.delimiter = b';';
    options.na_tokens = vec!["-999".into()];
    options.missing = MissingPolicy::DropRows;
    let (d, _) = dataset("x;y\n1,5;a\n-999;b\n2;b\n", &options);
    // "1,5" is text under ';' — so x is categorical, and -999 is missing.
    assert_eq!(d.schema.columns[0].kind, Some(ColumnKind::Categorical));
    assert_eq!(d.rows(), 2);
    let (d, notices) = dataset("x;y\n1.5;a\n-999;b\n2;b\n", &options);
    assert_eq!(d.numeric.column(0).to_vec(), vec![1.5, 2.0]);
    assert!(notices.iter().any(|n| n.contains("1 of 3 rows dropped")));
}

#[test]
fn a_mostly_numeric_text_column_is_pointed_out() {
    let mut text = String::from("x,y\n");
    for i in 0..100 {
        text.push_str(&format!("{},{}\n", if i == 60 { "12,5".to_string() } else { i.to_string() }, i % 2));
    }
    let text = text.replace("12,5", "\"12,5\"");
    let (d, notices) = dataset(&text, &ReadOptions::new("y"));
    assert_eq!(d.schema.columns[0].kind, Some(ColumnKind::Categorical));
    assert!(notices.iter().any(|n| n.contains("'12,5' (line 62)") && n.contains("use numeric x")), "{notices:?}");
}

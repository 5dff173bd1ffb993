//! Properties of schema inference: the order of the rows changes nothing
//! (kinds, levels, counts, class order, the positive class and every
//! summary are the same after a shuffle), and chunked parallel reading
//! equals a whole-file read.

mod common;

use baserate::data::csv_read::read_bytes;
use baserate::data::schema::Schema;
use baserate::data::{Dataset, MissingPolicy, ReadOptions};
use proptest::prelude::*;

fn schema_of(text: &str, options: &ReadOptions) -> Schema {
    let table = read_bytes("p.csv", text.as_bytes(), options).expect("read");
    Dataset::from_table(table, options).expect("dataset").0.schema
}

/// Summaries are sums over rows: a shuffle changes the rounding, so they
/// agree to a relative 1e-12, well above f64 rounding over a few hundred
/// rows; everything else agrees exactly.
fn assert_same_schema(a: &Schema, b: &Schema) {
    assert_eq!(a.target, b.target);
    assert_eq!(a.rows, b.rows);
    assert_eq!(a.columns.len(), b.columns.len());
    for (x, y) in a.columns.iter().zip(&b.columns) {
        assert_eq!((&x.name, x.role, x.kind, x.missing), (&y.name, y.role, y.kind, y.missing));
        assert_eq!(x.categorical, y.categorical);
        assert_eq!(x.imputation.is_some(), y.imputation.is_some());
        match (&x.numeric, &y.numeric) {
            (Some(p), Some(q)) => {
                assert_eq!((p.count, p.min, p.max, p.median), (q.count, q.min, q.max, q.median));
                assert_eq!(p.deciles, q.deciles, "deciles are order statistics");
                assert!(common::close(p.mean, q.mean, 1e-12), "{} vs {}", p.mean, q.mean);
                assert!(common::close(p.std_dev, q.std_dev, 1e-12), "{} vs {}", p.std_dev, q.std_dev);
            }
            (None, None) => {}
            _ => panic!("summaries differ for {}", x.name),
        }
    }
}

fn row_strategy() -> impl Strategy<Value = (f64, String, Option<i32>, String)> {
    (
        -1e4f64..1e4,
        prop::sample::select(vec!["north", "south", "east", "west", "12", "x y"]).prop_map(String::from),
        prop::option::weighted(0.9, -50i32..50),
        prop::sample::select(vec!["good", "bad", "late"]).prop_map(String::from),
    )
}

fn render(rows: &[(f64, String, Option<i32>, String)]) -> String {
    let mut text = String::from("amount,region,score,y\n");
    for (a, r, s, y) in rows {
        let score = s.map(|v| v.to_string()).unwrap_or_default();
        text.push_str(&format!("{a},\"{r}\",{score},{y}\n"));
    }
    text
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    #[test]
    fn shuffling_rows_does_not_change_the_schema(
        rows in prop::collection::vec(row_strategy(), 20..300),
        seed in any::<u64>(),
    ) {
        let classes: std::collections::BTreeSet<&str> = rows.iter().map(|r| r.3.as_str()).collect();
        prop_assume!(classes.len() >= 2);
        let mut options = ReadOptions::new("y");
        options.missing = MissingPolicy::Impute;
        let original = schema_of(&render(&rows), &options);
        // A seeded Fisher–Yates shuffle.
        let mut shuffled = rows.clone();
        let mut rng = baserate::demo::rng::Rng::new(seed);
        for i in (1..shuffled.len()).rev() {
            let j = (rng.next_u64() % (i as u64 + 1)) as usize;
            shuffled.swap(i, j);
        }
        assert_same_schema(&original, &schema_of(&render(&shuffled), &options));
    }
}

#[test]
fn demo_schema_survives_a_reversal() {
    let files = baserate::demo::generate(baserate::demo::DEFAULT_SEED, baserate::demo::DemoSize::standard());
    let text = &files[0].contents;
    let mut lines: Vec<&str> = text.lines().collect();
    let header = lines.remove(0);
    lines.reverse();
    let reversed = format!("{header}\n{}\n", lines.join("\n"));
    let mut options = ReadOptions::new("outcome");
    options.ids = vec!["application_id".into()];
    options.missing = MissingPolicy::Impute;
    assert_same_schema(&schema_of(text, &options), &schema_of(&reversed, &options));
}

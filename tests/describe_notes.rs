//! `describe` names numeric columns that look like integer-coded
//! categories: only whole numbers, at most 12 distinct values (our rule,
//! `baserate::data::integer_coded::MOST_CODES`).

mod common;

use common::{run, temp_dir, write};

#[test]
fn integer_coded_columns_are_named_with_the_flag_that_reads_them_as_categories() {
    let dir = temp_dir();
    let d = dir.path();
    let mut text = String::from("region_code,months,amount,y\n");
    for i in 0..200 {
        // region_code: 1..=12 (12 codes); months: 0..=12 (13 values); amount: fractions.
        let y = if i % 3 == 0 { "bad" } else { "good" };
        text.push_str(&format!("{},{},{}.5,{y}\n", i % 12 + 1, i % 13, i * 7));
    }
    write(d, "coded.csv", text.as_bytes());
    let (code, out, err) = run(d, &["describe", "coded.csv", "--target", "y"]);
    assert_eq!(code, 0, "{err}");
    let named: Vec<&str> = out.lines().filter(|l| l.contains("holds only the whole numbers")).collect();
    assert_eq!(named.len(), 1, "{out}");
    assert!(named[0].contains("'region_code'") && named[0].contains("--categorical region_code"), "{out}");
    // Read as a category, it is not named again.
    let (code, out, _) = run(d, &["describe", "coded.csv", "--target", "y", "--categorical", "region_code"]);
    assert_eq!(code, 0);
    assert!(!out.contains("holds only the whole numbers"), "{out}");
}

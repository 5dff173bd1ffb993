//! A costs file is read strictly (an unknown key anywhere is an error that
//! names it and the closest known key; `capacity` and `capacity_share` are
//! exclusive), and an output with two columns of one name is refused in
//! `score` and `export-sql` before anything is written.

mod common;

use common::{run, temp_dir, write};

fn fitted(dir: &std::path::Path) {
    let mut text = String::from("id,posterior_good,action,x,y\n");
    for i in 0..120 {
        let x = (i % 13) as f64;
        text.push_str(&format!(
            "r{i},{i},a{},{x},{}\n",
            i % 3,
            if (i * 7) % 10 < 2 + (x > 8.0) as usize * 4 { "bad" } else { "good" }
        ));
    }
    write(dir, "train.csv", text.as_bytes());
    let args =
        ["fit", "train.csv", "--target", "y", "--id", "id,posterior_good,action", "--family", "lda", "-o", "m.json"];
    let (code, _, err) = run(dir, &args);
    assert_eq!(code, 0, "{err}");
}

const GOOD: &str = "[actions.approve]\ngood = 0\nbad = 10\n[actions.decline]\ngood = 1\nbad = 0\n";

#[test]
fn the_costs_file_is_strict() {
    let dir = temp_dir();
    let d = dir.path();
    fitted(d);
    let cases = [
        (GOOD.replace("[actions.decline]", "[action.decline]"), "unknown key 'action' (did you mean 'actions'?)"),
        (format!("title = \"x\"\n{GOOD}"), "unknown key 'title'"),
        (GOOD.replace("bad = 10", "bad = 10\ncapacty = 5"), "unknown key 'capacty'"),
        (
            GOOD.replace("bad = 10", "bad = { fixed = 1, rat = 2 }"),
            "approve.bad: unknown key 'rat' (did you mean 'rate'?)",
        ),
        (GOOD.replace("bad = 10", "bad = 10\ncapacity = 5\ncapacity_share = 0.1"), "not both"),
        (GOOD.replace("bad = 10", "bad = { rate = 1, column = 3 }"), "column must be a column's name"),
    ];
    for (i, (text, message)) in cases.iter().enumerate() {
        let name = format!("costs{i}.toml");
        write(d, &name, text.as_bytes());
        for command in [
            &["score", "m.json", "train.csv", "-o", "out.csv", "--costs"][..],
            &["export-sql", "m.json", "--table", "t", "--costs"],
        ] {
            let mut args = command.to_vec();
            args.push(&name);
            let (code, _, err) = run(d, &args);
            assert_eq!(code, 1, "{args:?}: {err}");
            assert!(err.contains(&name) && err.contains(message), "{args:?}: {err}");
        }
    }
    assert!(!d.join("out.csv").exists());
    write(d, "good.toml", GOOD.as_bytes());
    assert_eq!(run(d, &["score", "m.json", "train.csv", "-o", "out.csv", "--costs", "good.toml"]).0, 0);
}

#[test]
fn clashing_output_columns_are_refused() {
    let dir = temp_dir();
    let d = dir.path();
    fitted(d);
    write(d, "costs.toml", GOOD.as_bytes());
    for (args, name) in [
        (vec!["score", "m.json", "train.csv", "-o", "a.csv", "--id", "posterior_good"], "posterior_good"),
        (vec!["score", "m.json", "train.csv", "-o", "a.csv", "--costs", "costs.toml", "--id", "action"], "action"),
        (vec!["export-sql", "m.json", "--table", "t", "--id", "posterior_good", "-o", "a.sql"], "posterior_good"),
        (
            vec!["export-sql", "m.json", "--table", "t", "--costs", "costs.toml", "--id", "action", "-o", "a.sql"],
            "action",
        ),
    ] {
        let (code, _, err) = run(d, &args);
        assert_eq!(code, 2, "{args:?}: {err}");
        assert!(err.contains(&format!("two columns named '{name}'")) && err.contains("--id"), "{args:?}: {err}");
        assert!(!d.join("a.csv").exists() && !d.join("a.sql").exists());
    }
    // Without the clash, the same columns pass through.
    let (code, _, err) = run(d, &["score", "m.json", "train.csv", "-o", "a.csv", "--id", "id", "--keep", "action"]);
    assert_eq!(code, 0, "{err}");
}

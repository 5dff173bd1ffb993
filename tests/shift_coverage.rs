//! The base-rate estimators as methods: data from a known generative model
//! (two Gaussian classes with a shared covariance, so LDA is the right
//! model), 20,000 training rows at prior 0.15 and 5,000 new rows at prior
//! 0.03, 200 bootstrap draws. Over 100 repeats the 95% intervals of the EM
//! estimate (Saerens, Latinne & Decaestecker 2002) and of BBSE (Lipton,
//! Wang & Smola 2018) each cover the true 0.03 at least 85 times. This is a
//! test of the methods at fixed seeds, not a tuned value. Release mode: a
//! few seconds.

use baserate::data::csv_read::read_bytes;
use baserate::data::split::{assign, SplitPlan};
use baserate::data::{Dataset, ReadOptions};
use baserate::demo::gaussian::Gaussian;
use baserate::evaluate::compare::{cross_predict, Candidate};
use baserate::model::{fit, Family, FamilyParams};
use baserate::prior::{bbse, bootstrap_interval, em_probabilities};
use baserate::progress::Progress;
use baserate::rng::Rng;
use rayon::prelude::*;

fn sample(rows: usize, prior: f64, rng: &mut Rng, classes: &[Gaussian; 2]) -> Dataset {
    let mut text = String::from("x1,x2,y\n");
    for _ in 0..rows {
        let k = usize::from(rng.bernoulli(prior));
        let x = classes[k].sample(rng);
        text.push_str(&format!("{},{},{}\n", x[0], x[1], ["a_other", "b_event"][k]));
    }
    let mut options = ReadOptions::new("y");
    options.positive = Some("b_event".into());
    Dataset::from_table(read_bytes("sim.csv", text.as_bytes(), &options).expect("read"), &options).expect("dataset").0
}

#[test]
fn intervals_cover_the_true_new_base_rate() {
    let correlation: [&[f64]; 2] = [&[1.0, 0.3], &[0.3, 1.0]];
    let classes = [
        Gaussian::new(&[0.0, 0.0], &[1.0, 1.0], &correlation).expect("pd"),
        Gaussian::new(&[1.2, 0.8], &[1.0, 1.0], &correlation).expect("pd"),
    ];
    let truth = 0.03;
    let covered: Vec<(bool, bool)> = (0..100u64)
        .into_par_iter()
        .map(|repeat| {
            let mut rng = Rng::new(Rng::stream_seed(2026, repeat));
            let train = sample(20_000, 0.15, &mut rng, &classes);
            let new = sample(5_000, truth, &mut rng, &classes);
            let lda = FamilyParams::defaults(Family::Lda);
            let (model, _) = fit(&train, &lda).expect("fit");
            let training_prior = train.schema.target.class_mix();
            // Held-out confusion of the training rows (5-fold, out of fold).
            let assignment =
                assign(&SplitPlan::KFold { folds: 5, repeats: 1 }, &train.target, 2, repeat).expect("folds");
            let predictions =
                cross_predict(&train, &[Candidate::new("lda", lda)], &assignment, None, &Progress::silent())
                    .expect("oof");
            let mut confusion = vec![vec![0.0; 2]; 2];
            for (i, row) in predictions[0].log_posteriors[0].rows().into_iter().enumerate() {
                let predicted = usize::from(row[1] > row[0]);
                confusion[predicted][train.target[i] as usize] += 1.0 / train.rows() as f64;
            }
            let posteriors: Vec<f64> = model.posteriors(&new.inputs(), &training_prior).iter().copied().collect();
            let full = em_probabilities(&posteriors, 2, &training_prior, None, 1e-10, None).prior;
            let em_interval = bootstrap_interval(new.rows(), 2, 200, repeat, |rows| {
                Some(em_probabilities(&posteriors, 2, &training_prior, Some(rows), 1e-8, Some(&full)).prior)
            });
            let bbse_interval = bootstrap_interval(new.rows(), 2, 200, repeat + 1000, |rows| {
                let mut mix = [0.0; 2];
                for &r in rows {
                    mix[usize::from(posteriors[2 * r + 1] > posteriors[2 * r])] += 1.0 / rows.len() as f64;
                }
                bbse(&confusion, &mix, &training_prior).map(|e| e.prior)
            });
            let inside = |[low, high]: [f64; 2]| low <= truth && truth <= high;
            (inside(em_interval[1]), inside(bbse_interval[1]))
        })
        .collect();
    let em_covered = covered.iter().filter(|c| c.0).count();
    let bbse_covered = covered.iter().filter(|c| c.1).count();
    eprintln!("EM intervals covering the truth: {em_covered}/100; BBSE: {bbse_covered}/100");
    assert!(em_covered >= 85, "EM: {em_covered}/100");
    assert!(bbse_covered >= 85, "BBSE: {bbse_covered}/100");
}

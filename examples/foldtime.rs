use baserate::model::*;
use baserate::progress::Progress;
fn main() {
    let p = std::env::args().nth(1).unwrap();
    let (d, _) =
        baserate::data::Dataset::read(std::path::Path::new(&p), &baserate::data::ReadOptions::new("y")).unwrap();
    let params = FamilyParams::defaults(Family::Logistic);
    let t = std::time::Instant::now();
    let (full, diag) = fit(&d, &params).unwrap();
    println!("full {:?} {} it", t.elapsed(), diag.iterations);
    let w: Vec<f64> = (0..d.rows()).map(|i| if i % 5 == 0 { 0.0 } else { 1.0 }).collect();
    let t = std::time::Instant::now();
    let (_, diag) = fit_weighted(&d, &params, Some(&w), Some(&full), &Progress::silent()).unwrap();
    println!("warm {:?} {} it", t.elapsed(), diag.iterations);
    let t = std::time::Instant::now();
    let (_, diag) = fit_weighted(&d, &params, Some(&w), None, &Progress::silent()).unwrap();
    println!("cold {:?} {} it", t.elapsed(), diag.iterations);
    for f in [Family::Lda, Family::Qda, Family::NaiveBayes] {
        let t = std::time::Instant::now();
        let (m, _) = fit_weighted(&d, &FamilyParams::defaults(f), Some(&w), None, &Progress::silent()).unwrap();
        let t1 = t.elapsed();
        let rows: Vec<usize> = (0..d.rows()).filter(|i| i % 5 == 0).collect();
        let t = std::time::Instant::now();
        let _ = m.log_posteriors_of(&d.inputs(), &rows, &[0.95, 0.05]);
        println!("{:?} fit {:?} predict {:?}", f, t1, t.elapsed());
    }
}

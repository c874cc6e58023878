//! Levenberg-Marquardt (`fit::optimize::least_squares`) on a valley far narrower than the
//! difference steps it is given: the sharp step of a caustic crossing, sampled densely. The
//! data are noise-free, so the minimum is the model that made them (zero residuals: true by
//! construction).

use causeway::fit::optimize::least_squares;

/// A smoothed step of width 0.002 at `t0` and height `a` (a logistic), the shape of a fold
/// crossing's rise.
fn step_curve(t: f64, t0: f64, a: f64) -> f64 {
    a / (1.0 + (-(t - t0) / 0.002).exp())
}

#[test]
fn levenberg_marquardt_follows_a_valley_narrower_than_its_steps() {
    let times: Vec<f64> = (0..400).map(|k| 0.49 + 0.02 * k as f64 / 399.0).collect();
    let sigma = 1e-3;
    let residuals = |p: &[f64]| {
        Some(
            times
                .iter()
                .map(|&t| (step_curve(t, p[0], p[1]) - step_curve(t, 0.5, 1.0)) / sigma)
                .collect::<Vec<f64>>(),
        )
    };
    // Steps of 0.05 in t0: twenty-five times the step's width, as a simplex step of a day is
    // to a crossing of an hour. The start's t0 is half a width off.
    let m = least_squares(&residuals, &[0.501, 1.05], &[0.05, 0.05], 1e-12, 100).unwrap();
    assert!(
        (m.x[0] - 0.5).abs() < 1e-7 && (m.x[1] - 1.0).abs() < 1e-7 && m.value < 1e-6,
        "ended at {:?}, sum of squares {} after {} evaluations",
        m.x,
        m.value,
        m.evaluations
    );
}

use causeway::{lens::LensSystem, solve};
use num_complex::Complex64;
use std::time::Instant;
fn main() {
    let mut state = 12345u64;
    let mut rnd = || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    let n = 1_000_000;
    let src: Vec<Complex64> = (0..n)
        .map(|_| {
            let r = 2.0 * rnd().sqrt();
            Complex64::from_polar(r, std::f64::consts::TAU * rnd())
        })
        .collect();
    for (s, q) in [(1.0, 1.0), (1.2, 1e-3), (0.8, 1e-4), (2.5, 1e-7)] {
        let lens = LensSystem::binary(s, q).unwrap();
        let t = Instant::now();
        let a = solve::magnifications(&lens, &src).unwrap();
        let dt = t.elapsed().as_secs_f64();
        println!(
            "s={s} q={q}: {:.3e}/s  (sum {})",
            n as f64 / dt,
            a.iter().sum::<f64>()
        );
        let mut solver = solve::ImageSolver::new(&lens).unwrap();
        let t = Instant::now();
        let mut sum = 0.0;
        for z in &src[..200000] {
            solver.reset();
            sum += solver.magnification(*z).unwrap();
        }
        let st: Vec<usize> = causeway::solve::images::STATS
            .iter()
            .map(|x| x.swap(0, std::sync::atomic::Ordering::Relaxed))
            .collect();
        println!(
            "  cold 1 thread: {:.3e}/s {sum}",
            200000.0 / t.elapsed().as_secs_f64()
        );
        println!(
            "  aberth calls {} mean iters {:.2} extra frames {} second chances {}",
            st[0],
            st[1] as f64 / st[0] as f64,
            st[2],
            st[3]
        );
        let t = Instant::now();
        let mut sum = 0.0;
        for z in &src[..200000] {
            sum += solver.magnification(*z).unwrap();
        }
        println!(
            "  warm 1 thread: {:.3e}/s {sum}",
            200000.0 / t.elapsed().as_secs_f64()
        );
        let st: Vec<usize> = causeway::solve::images::STATS
            .iter()
            .map(|x| x.swap(0, std::sync::atomic::Ordering::Relaxed))
            .collect();
        println!(
            "  aberth calls {} mean iters {:.2} extra frames {} second chances {}",
            st[0],
            st[1] as f64 / st[0] as f64,
            st[2],
            st[3]
        );
    }
}
#[allow(dead_code)]
fn unused() {}

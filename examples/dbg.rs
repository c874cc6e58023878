use causeway::{lens::LensSystem, solve::ImageSolver};
use num_complex::Complex64;
fn main() {
    let a: Vec<f64> = std::env::args()
        .skip(1)
        .map(|s| s.parse().unwrap())
        .collect();
    let lens = LensSystem::binary(a[0], a[1]).unwrap();
    let mut s = ImageSolver::new(&lens).unwrap();
    let r = s.images(Complex64::new(a[2], a[3]));
    println!("{r:?}");
}

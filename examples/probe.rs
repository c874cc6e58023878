use causeway::{caustics, lens::LensSystem};
fn main() {
    let q = 1e-4;
    for s in [0.5, 0.6, 0.7, 0.8, 1.3, 1.5, 2.0, 3.0] {
        let lens = LensSystem::binary(s, q).unwrap();
        let t = std::time::Instant::now();
        let c = caustics::curves(&lens).unwrap();
        let xh = lens.lenses()[0].position.re;
        println!(
            "s={s}: {} curves in {:?}, points {:?}",
            c.len(),
            t.elapsed(),
            c.iter().map(|k| k.caustic.len()).collect::<Vec<_>>()
        );
        for k in &c {
            let (a, b, cc, d) = k.caustic_bounds();
            println!("   caustic x [{a:.6e}, {b:.6e}] y [{cc:.6e}, {d:.6e}] center-host {:.6e} width {:.6e}", 0.5*(a+b)-xh, b-a);
        }
        println!(
            "   s-1/s = {:.6e}, 4q/(s-1/s)^2 = {:.6e}",
            s - 1.0 / s,
            4.0 * q / (s - 1.0 / s).powi(2)
        );
    }
}

//! Writing, reading and rendering a 2048 x 2048 map (16 MiB of float32 pixels).

use causeway::lens::LensSystem;
use causeway::map::{
    read_fits, render_png, write_fits, MagnificationMap, Overlay, Provenance, Window,
};
use criterion::{criterion_group, criterion_main, Criterion, Throughput};

fn map(n: usize) -> MagnificationMap {
    let window = Window::new((0.0, 0.0), 2.0, n).unwrap();
    let data = ndarray::Array2::from_shape_fn((n, n), |(iy, ix)| {
        let (x, y) = window.pixel_center(ix, iy);
        let u2 = x * x + y * y;
        ((u2 + 2.0) / (u2.sqrt() * (u2 + 4.0).sqrt())) as f32
    });
    let provenance = Provenance {
        lens: LensSystem::single(),
        engine: "formula".into(),
        density: 0.0,
        rays_shot: 0,
        rays_landed: 0,
        version: env!("CARGO_PKG_VERSION").into(),
        build_time: "2026-01-01T00:00:00".into(),
        build_seconds: 0.0,
        certificate: None,
    };
    MagnificationMap {
        window,
        data,
        provenance,
    }
}

fn bench(c: &mut Criterion) {
    let n = 2048;
    let m = map(n);
    let dir = std::env::temp_dir();
    let fits = dir.join(format!("causeway-bench-{}.fits", std::process::id()));
    let png = dir.join(format!("causeway-bench-{}.png", std::process::id()));
    let mut g = c.benchmark_group("map_files_2048");
    g.sample_size(10);
    g.throughput(Throughput::Elements((n * n) as u64));
    g.bench_function("write_fits", |b| b.iter(|| write_fits(&m, &fits).unwrap()));
    g.bench_function("read_fits", |b| b.iter(|| read_fits(&fits).unwrap()));
    let overlay = Overlay::from_lens(&m.provenance.lens);
    g.bench_function("render_png", |b| {
        b.iter(|| render_png(&m, &overlay, &png).unwrap())
    });
    g.finish();
    let _ = std::fs::remove_file(&fits);
    let _ = std::fs::remove_file(&png);
}

criterion_group!(benches, bench);
criterion_main!(benches);

//! The Fourier route of [`super::Preconvolved`]: plans kept for the process, the map's
//! half-spectrum, and the kernel's real transform multiplied in and brought back (see the
//! parent module's documentation for the scheme).

use super::*;

/// FFT plans of size `l`, forward and inverse, from one planner kept for the process (it keeps
/// every plan it made: a curve convolves a few crops of the same sizes, each five times).
pub(super) fn plans(l: usize) -> (Arc<dyn Fft<f64>>, Arc<dyn Fft<f64>>) {
    static PLANNER: OnceLock<Mutex<FftPlanner<f64>>> = OnceLock::new();
    let mut planner = PLANNER
        .get_or_init(|| Mutex::new(FftPlanner::new()))
        .lock()
        // A panic elsewhere cannot leave the planner inconsistent: plans are only added.
        .unwrap_or_else(|e| e.into_inner());
    (planner.plan_fft_forward(l), planner.plan_fft_inverse(l))
}

/// For each chunk `j` of `out` (two `len`-long rows, the last maybe one): `fill(j, buf)` loads
/// the zeroed `buf` (the transform's length), which is transformed in place, and
/// `take(j, buf, scratch, chunk)` writes the chunk (`scratch` serves further transforms of
/// the same length). The building block of every pass below.
fn paired<T: Send>(
    out: &mut [T],
    len: usize,
    fft: &Arc<dyn Fft<f64>>,
    fill: impl Fn(usize, &mut [Complex64]) + Sync,
    take: impl Fn(usize, &[Complex64], &mut [Complex64], &mut [T]) + Sync,
) {
    let l = fft.len();
    out.par_chunks_mut(2 * len).enumerate().for_each_init(
        || (vec![ZERO; l], vec![ZERO; fft.get_inplace_scratch_len()]),
        |(buf, scratch), (j, chunk)| {
            buf.fill(ZERO);
            fill(j, buf);
            fft.process_with_scratch(buf, scratch);
            take(j, buf, scratch, chunk);
        },
    );
}

/// The half spectrum of a map (see [`MapSpectrum`]): columns `u = 0..=l/2`, `[u * l + v]`.
pub(super) fn forward(map: &MagnificationMap, l: usize) -> Vec<Complex64> {
    let n = map.window.pixels;
    let h = l / 2 + 1;
    let data = map
        .data
        .as_slice()
        .expect("map data are contiguous in standard order");
    let (fwd, _) = plans(l);
    // Rows 2j and 2j + 1 as one complex row z = a + i b; with Z = A + i B and A, B Hermitian,
    // A(k) = (Z(k) + conj Z(-k)) / 2 and B(k) = (Z(k) - conj Z(-k)) / 2i.
    let mut rows = vec![ZERO; l * h];
    paired(
        &mut rows[..n * h],
        h,
        &fwd,
        |j, buf| {
            for (k, y) in [2 * j, 2 * j + 1].into_iter().enumerate() {
                if y < n {
                    for (z, &v) in buf.iter_mut().zip(&data[y * n..(y + 1) * n]) {
                        if k == 0 {
                            z.re = v as f64;
                        } else {
                            z.im = v as f64;
                        }
                    }
                }
            }
        },
        |_, buf, _, chunk| {
            let (a, b) = chunk.split_at_mut(h);
            for u in 0..h {
                let (z, zc) = (buf[u], buf[if u == 0 { 0 } else { l - u }].conj());
                a[u] = (z + zc) * 0.5;
                if let Some(b) = b.get_mut(u) {
                    *b = (z - zc) * Complex64::new(0.0, -0.5);
                }
            }
        },
    );
    // Columns u = 0..=l/2 along y (consecutive columns share cache lines of `rows`).
    let mut half = vec![ZERO; h * l];
    half.par_chunks_mut(l).enumerate().for_each_init(
        || vec![ZERO; fwd.get_inplace_scratch_len()],
        |scratch, (u, column)| {
            for (y, c) in column.iter_mut().enumerate() {
                *c = rows[y * h + u];
            }
            fwd.process_with_scratch(column, scratch);
        },
    );
    half
}

/// Loads sequences `2j` and `2j + 1` (those below `count`) into the real and imaginary parts
/// of `buf`, each even: `value(i, k)` at indices `k` and `-k` for `k < w`.
fn even_pair(
    buf: &mut [Complex64],
    j: usize,
    count: usize,
    w: usize,
    value: impl Fn(usize, usize) -> f64,
) {
    let l = buf.len();
    for (part, i) in [2 * j, 2 * j + 1].into_iter().enumerate() {
        if i < count {
            for k in 0..w {
                let v = value(i, k);
                for at in [k, (l - k) % l] {
                    if part == 0 {
                        buf[at].re = v;
                    } else {
                        buf[at].im = v;
                    }
                }
            }
        }
    }
}

/// The map of `spectrum` convolved with the even kernel of `quadrant` at every valid centre;
/// `NaN` elsewhere.
pub(super) fn convolve_fourier(
    spectrum: &MapSpectrum,
    quadrant: &[f64],
    margin: usize,
) -> Vec<f64> {
    let (n, l) = (spectrum.map.window.pixels, spectrum.size);
    let (w, h) = (margin + 1, l / 2 + 1);
    let (fwd, inv) = plans(l);
    // An even real sequence has a real transform, so two of them go through one complex
    // transform as its real and imaginary parts. Along x: the kernel rows ky = 0..=margin,
    // giving `along_x[ky * h + u]`.
    let mut along_x = vec![0.0; w * h];
    paired(
        &mut along_x,
        h,
        &fwd,
        |j, buf| even_pair(buf, j, w, w, |ky, kx| quadrant[ky * w + kx]),
        |_, buf, _, chunk| {
            for (part, out) in chunk.chunks_mut(h).enumerate() {
                for (o, z) in out.iter_mut().zip(buf) {
                    *o = if part == 0 { z.re } else { z.im };
                }
            }
        },
    );
    // Along y, two columns u at a time (each even in ky). Each column of the kernel's
    // transform multiplies the map's and goes straight back along y: `product[u * l + y]`.
    let half = spectrum.half();
    // Every element is written below, so a buffer left by an earlier profile serves as is.
    let mut product = std::mem::take(&mut *spectrum.lock_spare());
    if product.len() != h * l {
        product = vec![ZERO; h * l];
    }
    paired(
        &mut product,
        l,
        &fwd,
        |j, buf| even_pair(buf, j, h, w, |u, ky| along_x[ky * h + u]),
        |j, kernel, scratch, columns| {
            for (part, column) in columns.chunks_mut(l).enumerate() {
                let u = 2 * j + part;
                let map = &half[u * l..(u + 1) * l];
                for ((c, &s), k) in column.iter_mut().zip(map).zip(kernel) {
                    *c = s * if part == 0 { k.re } else { k.im };
                }
                inv.process_with_scratch(column, scratch);
            }
        },
    );
    // Along x, two valid output rows y0, y1 at a time as one complex row A + i B, each
    // extended to all frequencies by A(l - u) = conj A(u) (bins 0 and l/2 are their own
    // mirrors, hence real).
    let (lo, hi) = (margin, n - margin);
    let scale = 1.0 / (l * l) as f64;
    let mut grid = vec![f64::NAN; n * n];
    paired(
        &mut grid[lo * n..hi * n],
        n,
        &inv,
        |j, buf| {
            let (y0, y1) = (lo + 2 * j, lo + 2 * j + 1);
            let pair = |u: usize| {
                let a = product[u * l + y0];
                let b = if y1 < hi { product[u * l + y1] } else { ZERO };
                (a, b)
            };
            for u in 1..l.div_ceil(2) {
                let (a, b) = pair(u);
                buf[u] = Complex64::new(a.re - b.im, a.im + b.re);
                buf[l - u] = Complex64::new(a.re + b.im, b.re - a.im);
            }
            for u in [0, l / 2].into_iter().filter(|&u| 2 * u % l == 0) {
                let (a, b) = pair(u);
                buf[u] = Complex64::new(a.re, b.re);
            }
        },
        |_, buf, _, chunk| {
            for (part, out) in chunk.chunks_mut(n).enumerate() {
                for (o, z) in out[lo..hi].iter_mut().zip(&buf[lo..hi]) {
                    *o = scale * if part == 0 { z.re } else { z.im };
                }
            }
        },
    );
    *spectrum.lock_spare() = product;
    grid
}

/// The smallest size `>= n` whose prime factors are 2, 3, 5 or 7 (fast FFT sizes).
pub(super) fn fft_size(n: usize) -> usize {
    (n.max(1)..)
        .find(|&m| {
            let mut k = m;
            for p in [2, 3, 5, 7] {
                while k % p == 0 {
                    k /= p;
                }
            }
            k == 1
        })
        .expect("a smooth size exists")
}

/// Out-of-place transpose of an `l x l` array, in tiles.
pub(super) fn transpose(a: &[Complex64], l: usize) -> Vec<Complex64> {
    const T: usize = 32;
    let mut out = vec![ZERO; l * l];
    out.par_chunks_mut(l * T)
        .enumerate()
        .for_each(|(tile_row, chunk)| {
            let c0 = tile_row * T;
            let rows = chunk.len() / l;
            for r0 in (0..l).step_by(T) {
                for c in c0..c0 + rows {
                    for r in r0..(r0 + T).min(l) {
                        chunk[(c - c0) * l + r] = a[r * l + c];
                    }
                }
            }
        });
    out
}

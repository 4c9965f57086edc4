//! Elementwise kernels of the encoding operator, compiled twice: for the baseline x86-64
//! instruction set and for AVX, chosen at run time. The AVX complex products use the
//! duplicate/swap/addsub pattern (four complex values per instruction, no fused
//! multiply-add): every element sees the same IEEE operations as the plain formula, so both
//! builds give the same bits.

use num_complex::Complex32;

/// Runs `$body` (a call of an `#[inline(always)]` function) compiled with AVX-512F or AVX2
/// when the CPU has it, else as the baseline build.
macro_rules! dispatch {
    ($body:expr) => {{
        #[cfg(target_arch = "x86_64")]
        {
            #[target_feature(enable = "avx512f")]
            fn wider<R>(f: impl FnOnce() -> R) -> R {
                f()
            }
            #[target_feature(enable = "avx2")]
            fn wide<R>(f: impl FnOnce() -> R) -> R {
                f()
            }
            if std::arch::is_x86_feature_detected!("avx512f") {
                // SAFETY: the CPU was just checked to support AVX-512F.
                return unsafe { wider(|| $body) };
            }
            if std::arch::is_x86_feature_detected!("avx2") {
                // SAFETY: the CPU was just checked to support AVX2.
                return unsafe { wide(|| $body) };
            }
        }
        $body
    }};
}

/// How the product is stored.
#[derive(Clone, Copy)]
enum Store {
    Set,
    Add,
}

/// `out[i] = a[i]·b[i]`.
pub fn mul(out: &mut [Complex32], a: &[Complex32], b: &[Complex32]) {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx512f") {
        // SAFETY: the CPU supports AVX-512F (checked on the line above).
        return unsafe { avx512::product(out, a, b, false, Store::Set) };
    }
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx") {
        // SAFETY: the CPU supports AVX (checked on the line above).
        return unsafe { avx::product(out, a, b, false, Store::Set) };
    }
    mul_body(out, a, b)
}

/// `out[i] = conj(a[i])·b[i]`.
pub fn conj_mul(out: &mut [Complex32], a: &[Complex32], b: &[Complex32]) {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx512f") {
        // SAFETY: the CPU supports AVX-512F (checked on the line above).
        return unsafe { avx512::product(out, a, b, true, Store::Set) };
    }
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx") {
        // SAFETY: the CPU supports AVX (checked on the line above).
        return unsafe { avx::product(out, a, b, true, Store::Set) };
    }
    conj_mul_body(out, a, b)
}

/// `out[i] += conj(a[i])·b[i]`.
pub fn conj_mul_add(out: &mut [Complex32], a: &[Complex32], b: &[Complex32]) {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx512f") {
        // SAFETY: the CPU supports AVX-512F (checked on the line above).
        return unsafe { avx512::product(out, a, b, true, Store::Add) };
    }
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx") {
        // SAFETY: the CPU supports AVX (checked on the line above).
        return unsafe { avx::product(out, a, b, true, Store::Add) };
    }
    conj_mul_add_body(out, a, b)
}

/// `out[o] = Σ_i w[i·n + o]·c[i]` for `n` rows of `len` values (`c` and `out` row-major,
/// `w` an `n × n` matrix): a block of rows recombined, as in `L = C W` for a Casorati
/// block with frames as rows. Each output value sees the same operations, in the same row
/// order, as `acc += w·x` on a zeroed accumulator, so the AVX and plain builds give the same bits;
/// the AVX build keeps four output rows of eight values in registers across the whole sum
/// instead of storing and reloading a row per term.
///
/// `block` is scratch (resized as needed), so a caller in a loop allocates once.
///
/// # Panics
/// If the lengths are not `n·len`, `n·len` and `n²`.
pub fn combine(
    out: &mut [Complex32],
    c: &[Complex32],
    w: &[Complex32],
    n: usize,
    block: &mut Vec<Complex32>,
) {
    assert!(
        n > 0 && c.len().is_multiple_of(n) && out.len() == c.len() && w.len() == n * n,
        "combine of {} rows: {} inputs, {} outputs, {} weights",
        n,
        c.len(),
        out.len(),
        w.len()
    );
    let len = c.len() / n;
    let mut done = 0;
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx") {
        // SAFETY: the CPU supports AVX (checked on the line above).
        done = unsafe { avx::combine(out, c, w, n, len, block) };
    }
    for o in 0..n {
        for p in done..len {
            let mut acc = Complex32::default();
            for i in 0..n {
                acc += w[i * n + o] * c[i * len + p];
            }
            out[o * len + p] = acc;
        }
    }
}

/// `Σ conj(a[i])·b[i]` in f32, for blocks of up to a few thousand values. The AVX build
/// keeps four complex lanes of `re(a)·b` and `im(a)·swap(b)` and combines them at the end;
/// the baseline build keeps eight lanes of the plain formula. Each is deterministic; the
/// two differ in rounding.
pub fn conj_dot(a: &[Complex32], b: &[Complex32]) -> Complex32 {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx") {
        // SAFETY: the CPU supports AVX (checked on the line above).
        return unsafe { avx::conj_dot(a, b) };
    }
    conj_dot_lanes(a, b)
}

fn conj_dot_lanes(a: &[Complex32], b: &[Complex32]) -> Complex32 {
    const LANES: usize = 8;
    let (mut re, mut im) = ([0f32; LANES], [0f32; LANES]);
    let mut xs = a.chunks_exact(LANES);
    let mut ys = b.chunks_exact(LANES);
    for (x, y) in (&mut xs).zip(&mut ys) {
        for i in 0..LANES {
            re[i] += x[i].re * y[i].re + x[i].im * y[i].im;
            im[i] += x[i].re * y[i].im - x[i].im * y[i].re;
        }
    }
    let tail: Complex32 = xs
        .remainder()
        .iter()
        .zip(ys.remainder())
        .map(|(x, y)| x.conj() * *y)
        .sum();
    Complex32::new(re.iter().sum(), im.iter().sum()) + tail
}

#[cfg(target_arch = "x86_64")]
mod avx {
    use super::Store;
    use num_complex::Complex32;
    use std::arch::x86_64::*;

    /// `out ⟵ a·b` or `conj(a)·b`, four complex values per step, the tail in scalar code.
    ///
    /// With `a = (p, q)`, `b = (u, v)`: `a·b = (pu − qv, pv + qu)` is
    /// `addsub(p·b, q·swap(b))`; `conj(a)·b = (pu + qv, pv − qu)` is
    /// `addsub(p·b, −q·swap(b))`. Each lane is one product pair and one add or subtract,
    /// in the plain formula's order.
    #[target_feature(enable = "avx")]
    pub(super) fn product(
        out: &mut [Complex32],
        a: &[Complex32],
        b: &[Complex32],
        conj: bool,
        store: Store,
    ) {
        let n = out.len().min(a.len()).min(b.len());
        let whole = n / 4 * 4;
        let flip = _mm256_set1_ps(-0.0);
        // One loop per case, as in the AVX-512 build, so the branches stay out of the loop
        // body.
        macro_rules! body {
            ($conj:expr, $add:expr) => {
                for i in (0..whole).step_by(4) {
                    // SAFETY: i + 4 ≤ n, so every 8-float access is inside its slice;
                    // unaligned loads and stores are used.
                    unsafe {
                        let po = out.as_mut_ptr().add(i).cast::<f32>();
                        let va = _mm256_loadu_ps(a.as_ptr().add(i).cast::<f32>());
                        let vb = _mm256_loadu_ps(b.as_ptr().add(i).cast::<f32>());
                        let p = _mm256_moveldup_ps(va);
                        let mut q = _mm256_movehdup_ps(va);
                        if $conj {
                            q = _mm256_xor_ps(q, flip);
                        }
                        let swapped = _mm256_permute_ps::<0b1011_0001>(vb);
                        let mut r =
                            _mm256_addsub_ps(_mm256_mul_ps(p, vb), _mm256_mul_ps(q, swapped));
                        if $add {
                            r = _mm256_add_ps(_mm256_loadu_ps(po), r);
                        }
                        _mm256_storeu_ps(po, r);
                    }
                }
            };
        }
        match (conj, store) {
            (false, Store::Set) => body!(false, false),
            (false, Store::Add) => body!(false, true),
            (true, Store::Set) => body!(true, false),
            (true, Store::Add) => body!(true, true),
        }
        for i in whole..n {
            let v = if conj {
                a[i].conj() * b[i]
            } else {
                a[i] * b[i]
            };
            match store {
                Store::Set => out[i] = v,
                Store::Add => out[i] += v,
            }
        }
    }

    /// The values `0..done` of every row of [`super::combine`] (`done` a multiple of 8,
    /// returned), eight values at a time: their column of the `n` input rows is copied
    /// into a contiguous block first (rows of a tile lie a multiple of 2 KiB apart, which
    /// maps them onto the same few cache sets), then every output row's eight values are
    /// summed in registers, four output rows at a time. `c·x = addsub(re(c)·x,
    /// im(c)·swap(x))`, the plain formula's operations lane by lane.
    #[target_feature(enable = "avx")]
    pub(super) fn combine(
        out: &mut [Complex32],
        c: &[Complex32],
        w: &[Complex32],
        n: usize,
        len: usize,
        block: &mut Vec<Complex32>,
    ) -> usize {
        const ROWS: usize = 4;
        let done = len / 8 * 8;
        block.resize(8 * n, Complex32::default());
        for p in (0..done).step_by(8) {
            for (i, b) in block.chunks_exact_mut(8).enumerate() {
                b.copy_from_slice(&c[i * len + p..i * len + p + 8]);
            }
            for o0 in (0..n).step_by(ROWS) {
                let rows = ROWS.min(n - o0);
                let mut acc = [[_mm256_setzero_ps(); 2]; ROWS];
                for (i, b) in block.chunks_exact(8).enumerate() {
                    // SAFETY: `b` holds eight complex values, sixteen floats.
                    let (x0, x1) = unsafe {
                        let px = b.as_ptr().cast::<f32>();
                        (_mm256_loadu_ps(px), _mm256_loadu_ps(px.add(8)))
                    };
                    let s0 = _mm256_permute_ps::<0b1011_0001>(x0);
                    let s1 = _mm256_permute_ps::<0b1011_0001>(x1);
                    // A last group of fewer than four rows repeats its last row in the
                    // spare registers (not stored), so the loop has a fixed length.
                    for (j, a) in acc.iter_mut().enumerate() {
                        let k = w[i * n + o0 + j.min(rows - 1)];
                        let (re, im) = (_mm256_set1_ps(k.re), _mm256_set1_ps(k.im));
                        let t0 = _mm256_addsub_ps(_mm256_mul_ps(re, x0), _mm256_mul_ps(im, s0));
                        let t1 = _mm256_addsub_ps(_mm256_mul_ps(re, x1), _mm256_mul_ps(im, s1));
                        a[0] = _mm256_add_ps(a[0], t0);
                        a[1] = _mm256_add_ps(a[1], t1);
                    }
                }
                for (j, a) in acc.iter().enumerate().take(rows) {
                    // SAFETY: p + 8 ≤ len, so both 8-float stores are inside output row o0 + j.
                    unsafe {
                        let po = out.as_mut_ptr().add((o0 + j) * len + p).cast::<f32>();
                        _mm256_storeu_ps(po, a[0]);
                        _mm256_storeu_ps(po.add(8), a[1]);
                    }
                }
            }
        }
        done
    }

    /// `Σ conj(a)·b`: lanes of `re(a)·b = (pu, pv)` and `im(a)·swap(b) = (qv, qu)`, then
    /// `(Σpu + Σqv, Σpv − Σqu)`.
    #[target_feature(enable = "avx")]
    pub(super) fn conj_dot(a: &[Complex32], b: &[Complex32]) -> Complex32 {
        let n = a.len().min(b.len());
        let whole = n / 4 * 4;
        let (mut s1, mut s2) = (_mm256_setzero_ps(), _mm256_setzero_ps());
        for i in (0..whole).step_by(4) {
            // SAFETY: i + 4 ≤ n, so every 8-float load is inside its slice.
            unsafe {
                let va = _mm256_loadu_ps(a.as_ptr().add(i).cast::<f32>());
                let vb = _mm256_loadu_ps(b.as_ptr().add(i).cast::<f32>());
                let swapped = _mm256_permute_ps::<0b1011_0001>(vb);
                s1 = _mm256_add_ps(s1, _mm256_mul_ps(_mm256_moveldup_ps(va), vb));
                s2 = _mm256_add_ps(s2, _mm256_mul_ps(_mm256_movehdup_ps(va), swapped));
            }
        }
        let (mut l1, mut l2) = ([0f32; 8], [0f32; 8]);
        // SAFETY: each array holds exactly eight floats.
        unsafe {
            _mm256_storeu_ps(l1.as_mut_ptr(), s1);
            _mm256_storeu_ps(l2.as_mut_ptr(), s2);
        }
        let (mut re, mut im) = (0f32, 0f32);
        for k in 0..4 {
            re += l1[2 * k] + l2[2 * k];
            im += l1[2 * k + 1] - l2[2 * k + 1];
        }
        let tail: Complex32 = a[whole..n]
            .iter()
            .zip(&b[whole..n])
            .map(|(x, y)| x.conj() * *y)
            .sum();
        Complex32::new(re, im) + tail
    }
}

/// The AVX-512 forms of [`avx`]'s products: eight complex values per step. AVX-512 has no
/// `addsub`; a masked subtract on the even (real) lanes of the sum does the same, so every
/// element still sees the plain formula's operations and the bits match the other builds.
#[cfg(target_arch = "x86_64")]
mod avx512 {
    use super::Store;
    use num_complex::Complex32;
    use std::arch::x86_64::*;

    /// Lanes that hold real parts.
    const REAL: __mmask16 = 0x5555;

    /// `addsub(x, y)`: `x − y` in the real lanes, `x + y` in the imaginary ones.
    #[inline]
    #[target_feature(enable = "avx512f")]
    fn addsub(x: __m512, y: __m512) -> __m512 {
        _mm512_mask_sub_ps(_mm512_add_ps(x, y), REAL, x, y)
    }

    /// `out ⟵ a·b` or `conj(a)·b` (see [`super::avx::product`]).
    #[target_feature(enable = "avx512f")]
    pub(super) fn product(
        out: &mut [Complex32],
        a: &[Complex32],
        b: &[Complex32],
        conj: bool,
        store: Store,
    ) {
        let n = out.len().min(a.len()).min(b.len());
        let whole = n / 8 * 8;
        // One loop per case, so the branches stay out of the loop body.
        macro_rules! body {
            ($conj:expr, $add:expr) => {
                for i in (0..whole).step_by(8) {
                    // SAFETY: i + 8 ≤ n, so every 16-float access is inside its slice;
                    // unaligned loads and stores are used.
                    unsafe {
                        let po = out.as_mut_ptr().add(i).cast::<f32>();
                        let va = _mm512_loadu_ps(a.as_ptr().add(i).cast::<f32>());
                        let vb = _mm512_loadu_ps(b.as_ptr().add(i).cast::<f32>());
                        let p = _mm512_moveldup_ps(va);
                        let q = _mm512_movehdup_ps(va);
                        let swapped = _mm512_permute_ps::<0b1011_0001>(vb);
                        let (x, y) = (_mm512_mul_ps(p, vb), _mm512_mul_ps(q, swapped));
                        // conj(a)·b = (pu + qv, pv − qu): the other sign in each lane.
                        let mut r = if $conj {
                            _mm512_mask_add_ps(_mm512_sub_ps(x, y), REAL, x, y)
                        } else {
                            addsub(x, y)
                        };
                        if $add {
                            r = _mm512_add_ps(_mm512_loadu_ps(po), r);
                        }
                        _mm512_storeu_ps(po, r);
                    }
                }
            };
        }
        match (conj, store) {
            (false, Store::Set) => body!(false, false),
            (false, Store::Add) => body!(false, true),
            (true, Store::Set) => body!(true, false),
            (true, Store::Add) => body!(true, true),
        }
        for i in whole..n {
            let v = if conj {
                a[i].conj() * b[i]
            } else {
                a[i] * b[i]
            };
            match store {
                Store::Set => out[i] = v,
                Store::Add => out[i] += v,
            }
        }
    }
}

/// `v[i] *= w[i]` for a complex buffer seen as `[re, im, re, im, …]` and real weights given
/// per float (each weight twice, once for the real and once for the imaginary part).
pub fn scale(v: &mut [Complex32], w: &[f32]) {
    dispatch!(scale_body(bytemuck::cast_slice_mut(v), w))
}

/// One conjugate-gradient update, `x += α·d`, `r −= α·q`, returning the new `‖r‖²`: f32
/// sums over eight lanes per block of [`super::sums::BLOCK`] values, added in f64.
pub fn cg_update(
    x: &mut [Complex32],
    r: &mut [Complex32],
    d: &[Complex32],
    q: &[Complex32],
    alpha: f32,
) -> f64 {
    dispatch!(cg_update_body(x, r, d, q, alpha))
}

/// The next conjugate direction, `d = r + β·d`.
pub fn cg_direction(d: &mut [Complex32], r: &[Complex32], beta: f32) {
    dispatch!(cg_direction_body(d, r, beta))
}

/// `d += λ·x` (the Tikhonov term of a normal equation).
pub fn add_scaled_real(d: &mut [Complex32], x: &[Complex32], lambda: f32) {
    dispatch!(d.iter_mut().zip(x).for_each(|(d, x)| *d += *x * lambda))
}

/// A unit gradient step on `½‖E x − y‖²` given `b = Eᴴy`: `g = z − (g − b)` where `g`
/// holds `EᴴE z`.
pub fn gradient_step(g: &mut [Complex32], z: &[Complex32], b: &[Complex32]) {
    dispatch!(g
        .iter_mut()
        .zip(z)
        .zip(b)
        .for_each(|((g, z), b)| *g = *z - (*g - *b)))
}

/// The FISTA momentum step `z = new + m·(new − old)`, returning `(‖new − old‖², ‖new‖²)`
/// (f32 sums over eight lanes per block of [`super::sums::BLOCK`] values, added in f64).
pub fn momentum(new: &[Complex32], old: &[Complex32], z: &mut [Complex32], m: f32) -> (f64, f64) {
    dispatch!(momentum_body(new, old, z, m))
}

/// Complex soft thresholding with a scale, `v = s·v·max(|v| − t, 0)/|v|`, in place.
pub fn soft_scaled(v: &mut [Complex32], t: f32, scale: f32) {
    dispatch!(v.iter_mut().for_each(|z| {
        // sqrt of the squared norm rather than `norm()` (hypot, several times slower): the
        // values are far from overflow.
        let m = z.norm_sqr().sqrt();
        let f = if m > t { (m - t) / m * scale } else { 0.0 };
        *z *= f;
    }))
}

#[inline(always)]
fn momentum_body(new: &[Complex32], old: &[Complex32], z: &mut [Complex32], m: f32) -> (f64, f64) {
    const LANES: usize = 8;
    let block = super::sums::BLOCK;
    let (mut num, mut den) = (0f64, 0f64);
    for ((new, old), z) in new
        .chunks(block)
        .zip(old.chunks(block))
        .zip(z.chunks_mut(block))
    {
        let (mut n, mut d) = ([0f32; LANES], [0f32; LANES]);
        let whole = new.len() / LANES * LANES;
        for i in 0..new.len() {
            z[i] = new[i] + (new[i] - old[i]) * m;
        }
        for (a, b) in new[..whole]
            .chunks_exact(LANES)
            .zip(old[..whole].chunks_exact(LANES))
        {
            for k in 0..LANES {
                let (dr, di) = (a[k].re - b[k].re, a[k].im - b[k].im);
                n[k] += dr * dr + di * di;
                d[k] += a[k].re * a[k].re + a[k].im * a[k].im;
            }
        }
        let (mut tn, mut td) = (0f32, 0f32);
        for (a, b) in new[whole..].iter().zip(&old[whole..]) {
            tn += (*a - *b).norm_sqr();
            td += a.norm_sqr();
        }
        num += f64::from(n.iter().sum::<f32>() + tn);
        den += f64::from(d.iter().sum::<f32>() + td);
    }
    (num, den)
}

#[inline(always)]
fn cg_update_body(
    x: &mut [Complex32],
    r: &mut [Complex32],
    d: &[Complex32],
    q: &[Complex32],
    alpha: f32,
) -> f64 {
    const LANES: usize = 8;
    let block = super::sums::BLOCK;
    let mut total = 0f64;
    for (((x, r), d), q) in x
        .chunks_mut(block)
        .zip(r.chunks_mut(block))
        .zip(d.chunks(block))
        .zip(q.chunks(block))
    {
        let mut acc = [0f32; LANES];
        let mut tail = 0f32;
        let whole = r.len() / LANES * LANES;
        for i in 0..r.len() {
            x[i] += d[i] * alpha;
            r[i] -= q[i] * alpha;
        }
        for v in r[..whole].chunks_exact(LANES) {
            for k in 0..LANES {
                acc[k] += v[k].re * v[k].re + v[k].im * v[k].im;
            }
        }
        for v in &r[whole..] {
            tail += v.norm_sqr();
        }
        total += f64::from(acc.iter().sum::<f32>() + tail);
    }
    total
}

#[inline(always)]
fn cg_direction_body(d: &mut [Complex32], r: &[Complex32], beta: f32) {
    d.iter_mut().zip(r).for_each(|(d, r)| *d = *r + *d * beta);
}

#[inline(always)]
fn mul_body(out: &mut [Complex32], a: &[Complex32], b: &[Complex32]) {
    out.iter_mut()
        .zip(a)
        .zip(b)
        .for_each(|((o, a), b)| *o = *a * *b);
}

#[inline(always)]
fn conj_mul_body(out: &mut [Complex32], a: &[Complex32], b: &[Complex32]) {
    out.iter_mut()
        .zip(a)
        .zip(b)
        .for_each(|((o, a), b)| *o = a.conj() * *b);
}

#[inline(always)]
fn conj_mul_add_body(out: &mut [Complex32], a: &[Complex32], b: &[Complex32]) {
    out.iter_mut()
        .zip(a)
        .zip(b)
        .for_each(|((o, a), b)| *o += a.conj() * *b);
}

#[inline(always)]
fn scale_body(v: &mut [f32], w: &[f32]) {
    v.iter_mut().zip(w).for_each(|(v, w)| *v *= *w);
}

#[cfg(test)]
mod tests {
    use super::*;

    fn wide(z: Complex32) -> num_complex::Complex64 {
        num_complex::Complex64::new(z.re.into(), z.im.into())
    }

    #[test]
    fn kernels_agree_with_plain_complex_arithmetic() {
        // Exact equality: the same IEEE operations per element, only wider registers.
        let a: Vec<Complex32> = (0..37)
            .map(|i| Complex32::new(i as f32 * 0.3, 1.0 - i as f32))
            .collect();
        let b: Vec<Complex32> = (0..37)
            .map(|i| Complex32::new((i as f32).sin(), 0.5))
            .collect();
        let mut out = vec![Complex32::default(); 37];
        mul(&mut out, &a, &b);
        assert!(out
            .iter()
            .zip(a.iter().zip(&b))
            .all(|(o, (a, b))| *o == *a * *b));
        let mut c = out.clone();
        conj_mul(&mut c, &a, &b);
        assert!(c
            .iter()
            .zip(a.iter().zip(&b))
            .all(|(o, (a, b))| *o == a.conj() * *b));
        let start = out.clone();
        conj_mul_add(&mut out, &a, &b);
        assert!(out
            .iter()
            .zip(start.iter().zip(a.iter().zip(&b)))
            .all(|(o, (s, (a, b)))| *o == *s + a.conj() * *b));
        // combine: every output value against the plain sum `acc += w·x` over the rows in
        // order (exact: the same operations). 5 rows (a block of four plus one) of 37
        // values (whole blocks of eight plus a tail).
        let (n, len) = (5usize, 37usize);
        let c: Vec<Complex32> = (0..n * len)
            .map(|i| Complex32::new((i as f32 * 0.37).sin(), (i as f32 * 0.11).cos()))
            .collect();
        let w: Vec<Complex32> = (0..n * n)
            .map(|i| Complex32::new((i as f32 * 0.7).sin(), 0.3 - i as f32 * 0.05))
            .collect();
        let mut got = vec![Complex32::new(9.0, 9.0); n * len];
        combine(&mut got, &c, &w, n, &mut Vec::new());
        for o in 0..n {
            for p in 0..len {
                let mut acc = Complex32::default();
                for i in 0..n {
                    acc += w[i * n + o] * c[i * len + p];
                }
                assert_eq!(got[o * len + p], acc, "row {o} value {p}");
            }
        }
        // The dot product against f64: tolerance 1e-5 relative, f32 sums of 37 terms.
        let want: num_complex::Complex64 = a
            .iter()
            .zip(&b)
            .map(|(x, y)| wide(*x).conj() * wide(*y))
            .sum();
        let got = wide(conj_dot(&a, &b));
        assert!((got - want).norm() <= 1e-5 * want.norm(), "{got} vs {want}");
        let got = wide(conj_dot_lanes(&a, &b));
        assert!((got - want).norm() <= 1e-5 * want.norm(), "{got} vs {want}");
        let w: Vec<f32> = (0..37).map(|i| i as f32 * 0.25).collect();
        let mut v = a.clone();
        let twice: Vec<f32> = w.iter().flat_map(|&x| [x, x]).collect();
        scale(&mut v, &twice);
        assert!(v
            .iter()
            .zip(a.iter().zip(&w))
            .all(|(v, (a, w))| *v == *a * *w));
    }
}

//! Criterion benches of the core's hot loops on one thread, at the standard data
//! size (256 s at 4096 Hz, N = 2^20): template block generation, the product fill
//! with folding, chi-squared bands at a few peaks, segment preparation, and the
//! fused kernel per template. Run with `cargo bench --features bench`.

use chirpsift::chisq::evaluate_bands;
use chirpsift::fused::{self, product::fill_product, Bank, Prepared, Settings};
use chirpsift::grid::band;
use chirpsift::spectrum::DesignCurve;
use chirpsift::waveform::{Binary, Model};
use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use num_complex::{Complex32, Complex64};
use std::hint::black_box;
use std::time::Duration;

const FS: f64 = 4096.0;
const N: usize = 1 << 20;
const DF: f64 = FS / N as f64;
const N_FREQ: usize = N / 2 + 1;
const F_LOW: f64 = 20.0;

fn psd() -> Vec<f64> {
    let c = DesignCurve::Gen2ZeroDetuned;
    (0..N_FREQ).map(|k| c.psd(k as f64 * DF)).collect()
}

/// Pseudo-random data with the PSD's scale (fixed seed).
fn data(psd: &[f64]) -> Vec<Complex64> {
    let mut state = 20240611u64;
    let mut uniform = || {
        state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    };
    psd.iter()
        .map(|&s| {
            let a = if s.is_finite() { (s * N as f64 / FS).sqrt() } else { 0.0 };
            Complex64::new(uniform(), uniform()) * a
        })
        .collect()
}

fn bns() -> Model {
    Model::taylorf2(&Binary::new(1.4, 1.4, 0.0, 0.0).unwrap(), 1.0, 7).unwrap()
}

fn single_thread<R: Send>(f: impl FnOnce() -> R + Send) -> R {
    chirpsift::threads::set_threads(1).unwrap();
    chirpsift::threads::install(f)
}

fn blocks(c: &mut Criterion) {
    let model = bns();
    let (k_lo, k_hi) = band(F_LOW, Some(model.default_f_high()), DF, N_FREQ);
    let mut buf = vec![Complex32::new(0.0, 0.0); N_FREQ];
    let mut g = c.benchmark_group("block generation");
    g.throughput(Throughput::Elements((k_hi - k_lo) as u64));
    g.bench_function("1.4+1.4 Msun, 20 Hz to ISCO", |b| {
        b.iter(|| {
            model.for_each_block(k_lo, k_hi, DF, |k0, block| {
                for (o, h) in buf[k0..k0 + block.len()].iter_mut().zip(block) {
                    *o = Complex32::new(h.re as f32, h.im as f32);
                }
            });
            black_box(&buf);
        })
    });
    g.finish();
}

fn fill(c: &mut Criterion) {
    let s = psd();
    let seg = single_thread(|| Prepared::new(&data(&s), &s, DF).unwrap());
    let model = bns();
    let (k_lo, k_hi) = band(F_LOW, Some(model.default_f_high()), DF, N_FREQ);
    let inv_h = 1.0 / model.amplitude(k_lo as f64 * DF);
    let mut g = c.benchmark_group("product fill");
    g.throughput(Throughput::Elements((k_hi - k_lo) as u64));
    for dec in [1usize, 16] {
        let mut buf = vec![Complex32::new(0.0, 0.0); N / dec];
        g.bench_function(format!("transform length N/{dec}"), |b| {
            b.iter(|| black_box(fill_product(&seg, &model, k_lo, k_hi, inv_h, &mut buf)))
        });
    }
    g.finish();
}

fn chisq(c: &mut Criterion) {
    let s = psd();
    let seg = single_thread(|| Prepared::new(&data(&s), &s, DF).unwrap());
    let model = bns();
    let (k_lo, k_hi) = band(F_LOW, Some(model.default_f_high()), DF, N_FREQ);
    let inv_h = 1.0 / model.amplitude(k_lo as f64 * DF);
    let positions = [100_000.3, 400_000.7, 700_000.1, 900_000.9];
    let mut g = c.benchmark_group("chi-squared bands");
    g.throughput(Throughput::Elements((k_hi - k_lo) as u64));
    g.bench_function("16 bands at 4 peaks", |b| {
        b.iter(|| black_box(evaluate_bands(&seg, &model, k_lo, k_hi, inv_h, 1.0, &positions, 16)))
    });
    g.finish();
}

fn segment(c: &mut Criterion) {
    let s = psd();
    let d = data(&s);
    let mut g = c.benchmark_group("segment");
    g.sample_size(10);
    g.bench_function("prepare (1 thread)", |b| {
        b.iter(|| single_thread(|| black_box(Prepared::new(&d, &s, DF).unwrap())))
    });
    g.finish();
}

fn fused_per_template(c: &mut Criterion) {
    let s = psd();
    let seg = single_thread(|| Prepared::new(&data(&s), &s, DF).unwrap());
    let m1: Vec<f64> = (0..8).map(|i| 1.2 + 0.1 * i as f64).collect();
    let m2 = vec![1.3; 8];
    let zeros = vec![0.0; 8];
    let bank = Bank::taylorf2(&m1, &m2, &zeros, &zeros, None, F_LOW, 7).unwrap();
    let settings = Settings {
        min_snr: 6.0,
        cluster_samples: 4096,
        chi2_bands: 16,
        valid_start: 64 * 4096,
        valid_stop: N - 2 * 4096,
    };
    let mut g = c.benchmark_group("fused");
    g.sample_size(10);
    g.throughput(Throughput::Elements(bank.len() as u64));
    g.bench_function("8 templates 1.2-1.9 + 1.3 Msun (1 thread)", |b| {
        b.iter(|| single_thread(|| black_box(fused::filter_segment(&seg, &bank, &settings).unwrap())))
    });
    g.finish();
}

criterion_group! {
    name = kernels;
    config = Criterion::default().warm_up_time(Duration::from_secs(1)).measurement_time(Duration::from_secs(3));
    targets = blocks, fill, chisq, segment, fused_per_template
}
criterion_main!(kernels);

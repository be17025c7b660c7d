//! Ingest + clean (speed–distance–angle filter) + steps on 10^6 synthetic fixes
//! (100 animals × 10 000), from CSV and from Parquet, each stage timed. Prints fixes per
//! second and peak memory (VmHWM); asserts nothing. (Covariates and smoothing have their
//! own benches.)
//!
//! Each measurement runs in a child process of this binary so that its peak memory is its
//! own. Two memory figures: `peak` is the process's resident high-water mark (VmHWM: heap,
//! code, thread stacks, allocator slack), and `heap` is the largest number of bytes live
//! in the allocator during each stage (counted by a wrapper around the system allocator).
//! Run: `cargo bench --bench ingest`.

use std::alloc::{GlobalAlloc, Layout, System};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering::Relaxed};
use std::time::Instant;

use polars::prelude::*;

/// The system allocator, counting live bytes and their high-water mark.
struct Counting;

static LIVE: AtomicUsize = AtomicUsize::new(0);
static PEAK: AtomicUsize = AtomicUsize::new(0);

fn count_alloc(size: usize) {
    let now = LIVE.fetch_add(size, Relaxed) + size;
    PEAK.fetch_max(now, Relaxed);
}

// SAFETY: every call is forwarded unchanged to the system allocator; only counters are
// updated besides.
unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        let p = unsafe { System.alloc(layout) };
        if !p.is_null() {
            count_alloc(layout.size());
        }
        p
    }
    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        let p = unsafe { System.alloc_zeroed(layout) };
        if !p.is_null() {
            count_alloc(layout.size());
        }
        p
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) };
        LIVE.fetch_sub(layout.size(), Relaxed);
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        let p = unsafe { System.realloc(ptr, layout, new_size) };
        if !p.is_null() {
            LIVE.fetch_sub(layout.size(), Relaxed);
            count_alloc(new_size);
        }
        p
    }
}

#[global_allocator]
static ALLOC: Counting = Counting;

/// Heap high-water mark since the last call, MiB; restarts the count from what is live.
fn heap_peak_mib() -> f64 {
    let peak = PEAK.swap(LIVE.load(Relaxed), Relaxed);
    peak as f64 / 1048576.0
}

const ANIMALS: usize = 100;
const PER_ANIMAL: usize = 10_000;

fn peak_rss_mib() -> f64 {
    let s = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    s.lines()
        .find(|l| l.starts_with("VmHWM:"))
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|k| k.parse::<f64>().ok())
        .map_or(f64::NAN, |k| k / 1024.0)
}

/// A synthetic table: hourly GPS-like fixes on a slow random walk (64-bit LCG).
fn table() -> DataFrame {
    let n = ANIMALS * PER_ANIMAL;
    let mut id = Vec::with_capacity(n);
    let mut t = Vec::with_capacity(n);
    let mut lon = Vec::with_capacity(n);
    let mut lat = Vec::with_capacity(n);
    let mut lc = Vec::with_capacity(n);
    let mut state = 42u64;
    let mut u = || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    let classes = ["G", "3", "2", "1", "0", "A", "B"];
    for a in 0..ANIMALS {
        let (mut x, mut y) = (10.0 + a as f64 * 0.1, 60.0);
        for k in 0..PER_ANIMAL {
            x += (u() - 0.5) * 0.02;
            y += (u() - 0.5) * 0.01;
            id.push(format!("animal-{a:03}"));
            t.push(1_704_067_200_000_000i64 + k as i64 * 3_600_000_000);
            lon.push(x);
            lat.push(y);
            lc.push(classes[(u() * 7.0) as usize]);
        }
    }
    let time = Series::new("t".into(), t)
        .cast(&DataType::Datetime(TimeUnit::Microseconds, None))
        .unwrap();
    DataFrame::new_infer_height(vec![
        Column::new("id".into(), id),
        time.into(),
        Column::new("lon".into(), lon),
        Column::new("lat".into(), lat),
        Column::new("lc".into(), lc),
    ])
    .unwrap()
}

fn study(dir: &Path, file: &str) -> PathBuf {
    let p = dir.join(format!("{file}.toml"));
    std::fs::write(
        &p,
        format!(
            "[study]\nname='bench'\noutput='out'\n[fixes]\nfiles=['{file}']\n[fixes.columns]\n\
             animal='id'\ntime='t'\nlon='lon'\nlat='lat'\nclass='lc'\n[cleaning]\nmax_speed='3 m/s'\n\
             [tracks]\ngap='6 h'\n"
        ),
    )
    .unwrap();
    p
}

fn child(study_path: &Path) {
    use cairn::tracks::{clean, ingest, metrics};
    heap_peak_mib();
    let t0 = Instant::now();
    let s = cairn::study::Study::load(study_path).unwrap();
    let ingested = ingest::read_fixes(&s).unwrap();
    let t_ingest = t0.elapsed().as_secs_f64();
    let heap_ingest = heap_peak_mib();
    let n: usize = ingested.rows_per_file.iter().sum();
    let cleaned = clean::clean(ingested, &clean::Labels::from_study(&s), s.speed_filter());
    let t_clean = t0.elapsed().as_secs_f64();
    let heap_clean = heap_peak_mib();
    let steps = metrics::steps(&cleaned.tracks, s.gap_s());
    let secs = t0.elapsed().as_secs_f64();
    let heap_steps = heap_peak_mib();
    let name = study_path
        .file_stem()
        .unwrap()
        .to_string_lossy()
        .into_owned();
    println!(
        "{name:<8} {n:>9} fixes  ingest {t_ingest:>6.3} s  clean {:>6.3} s  steps {:>6.3} s  \
         total {secs:>6.3} s  {:>9.0} fixes/s  steps {:>8}  peak {:>7.1} MiB  \
         heap ingest/clean/steps {heap_ingest:.1}/{heap_clean:.1}/{heap_steps:.1} MiB",
        t_clean - t_ingest,
        secs - t_clean,
        n as f64 / secs,
        steps.len(),
        peak_rss_mib()
    );
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if let Some(i) = args.iter().position(|a| a == "--child") {
        child(Path::new(&args[i + 1]));
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let mut df = table();
    let size_mib = df.estimated_size() as f64 / 1048576.0;
    let csv = dir.path().join("fixes.csv");
    CsvWriter::new(std::fs::File::create(&csv).unwrap())
        .finish(&mut df)
        .unwrap();
    let pq = dir.path().join("fixes.parquet");
    ParquetWriter::new(std::fs::File::create(&pq).unwrap())
        .finish(&mut df)
        .unwrap();
    drop(df);
    println!(
        "ingest bench: {} animals × {} fixes; in-memory table {size_mib:.1} MiB; threads {}",
        ANIMALS,
        PER_ANIMAL,
        std::thread::available_parallelism().map_or(1, |n| n.get())
    );
    let exe = std::env::current_exe().unwrap();
    for file in ["fixes.parquet", "fixes.csv"] {
        let st = study(dir.path(), file);
        let status = std::process::Command::new(&exe)
            .arg("--child")
            .arg(&st)
            .status()
            .unwrap();
        assert!(status.success());
    }
}

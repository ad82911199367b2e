//! `spinney bench ...`: speed and memory figures, printed (never asserted in tests).
//!
//! `bench read`: generates (once) a CSV of 20 number and 5 category columns under
//! bench-data/, reads it with the same core the page uses, and prints throughput and peak
//! memory. The same file is used by tests/e2e/bench-read.mjs for the browser figure.

use std::io::Write;
use std::path::PathBuf;
use std::time::Instant;

use anyhow::Context;
use spinney_core::data::{read_table, ReadOptions};
use spinney_core::progress::Silent;

/// Deterministic generator (xorshift64*), so the file is the same on every machine.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// Path of the generated benchmark file of `mb` megabytes, writing it if absent.
pub fn bench_file(mb: u64) -> anyhow::Result<PathBuf> {
    let dir = PathBuf::from("bench-data");
    std::fs::create_dir_all(&dir)?;
    let path = dir.join(format!("read-{mb}mb.csv"));
    if path.exists() {
        return Ok(path);
    }
    let target = mb * 1_000_000;
    let mut out = std::io::BufWriter::new(std::fs::File::create(&path)?);
    let mut header: Vec<String> = (1..=20).map(|i| format!("x{i}")).collect();
    header.extend((1..=5).map(|i| format!("c{i}")));
    writeln!(out, "{}", header.join(","))?;
    let mut rng = Rng(0x5EED_2026);
    let levels = [
        "alder", "birch", "cedar", "elm", "hazel", "larch", "oak", "rowan",
    ];
    let mut written = 0u64;
    let mut line = String::new();
    while written < target {
        line.clear();
        for j in 0..20 {
            let v = rng.unit();
            if v < 0.02 {
                // about 2% missing
            } else if j % 4 == 0 {
                line += &format!("{}", (v * 1000.0) as u32);
            } else {
                line += &format!("{:.4}", (v - 0.3) * 100.0);
            }
            line.push(',');
        }
        for j in 0..5 {
            line += levels[(rng.next() % (3 + j as u64)) as usize];
            line.push(if j == 4 { '\n' } else { ',' });
        }
        out.write_all(line.as_bytes())?;
        written += line.len() as u64;
    }
    out.flush()?;
    Ok(path)
}

/// Peak resident memory of this process in bytes (Linux /proc), if known.
fn peak_rss() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb * 1024)
}

pub fn read(mb: u64, repeats: u32) -> anyhow::Result<()> {
    let path = bench_file(mb)?;
    let before = peak_rss().unwrap_or(0);
    let bytes = std::fs::read(&path).with_context(|| format!("reading {}", path.display()))?;
    let size = bytes.len() as f64;
    let mut best = f64::INFINITY;
    let mut rows = 0;
    for _ in 0..repeats.max(1) {
        let start = Instant::now();
        let loaded = read_table(&bytes, &ReadOptions::default(), &mut Silent)?;
        best = best.min(start.elapsed().as_secs_f64());
        rows = loaded.table.rows;
    }
    let peak = peak_rss().unwrap_or(0);
    println!(
        "file: {} ({:.1} MB, {rows} rows, 25 columns)",
        path.display(),
        size / 1e6
    );
    println!(
        "native read, 1 thread: best of {repeats}: {best:.3} s = {:.0} MB/s",
        size / 1e6 / best
    );
    println!(
        "peak resident memory: {:.0} MB = {:.2} x the file (file bytes held: 1.00 x; process before reading: {:.0} MB)",
        peak as f64 / 1e6,
        peak as f64 / size,
        before as f64 / 1e6
    );
    Ok(())
}

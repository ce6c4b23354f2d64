//! Helper for `scripts/bench_formats.sh`: writes a long random observation with the
//! library's writers, or drains one through the readers and reports throughput.
//!
//! ```text
//! cargo run --release --example formats_bench -- write OUT.fits SECONDS [N_CHAN TSAMP_US NBITS]
//! cargo run --release --example formats_bench -- read FILE
//! ```

use std::path::Path;
use std::time::Instant;

use burstbook::obs::{self, Container, Header, Site, UtcEpoch};
use rand::{RngCore, SeedableRng};
use rand_chacha::ChaCha8Rng;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    match args.first().map(String::as_str) {
        Some("write") if args.len() >= 3 => {
            let num = |i: usize, default: f64| -> Result<f64, Box<dyn std::error::Error>> {
                Ok(args.get(i).map_or(Ok(default), |s| s.parse())?)
            };
            let n_chan = num(3, 256.0)? as usize;
            let tsamp_s = num(4, 256.0)? * 1e-6;
            let n_samples = (num(2, 60.0)? / tsamp_s).round() as u64;
            write(
                Path::new(&args[1]),
                n_chan,
                tsamp_s,
                n_samples,
                num(5, 8.0)? as u32,
            )
        }
        Some("read") if args.len() == 2 => read(Path::new(&args[1])),
        _ => {
            Err("usage: formats_bench write OUT SECONDS [N_CHAN TSAMP_US NBITS] | read FILE".into())
        }
    }
}

fn write(
    path: &Path,
    n_chan: usize,
    tsamp_s: f64,
    n_samples: u64,
    nbits: u32,
) -> Result<(), Box<dyn std::error::Error>> {
    let header = Header {
        source: "Benchmark Field".into(),
        telescope: "Bench Array".into(),
        ra_deg: 120.0,
        dec_deg: 10.0,
        site: Site {
            name: "Bench Array".into(),
            lon_deg: 30.0,
            lat_deg: -25.0,
            height_m: 1200.0,
        },
        start: UtcEpoch::new(60600, 0.0),
        tsamp_s,
        freqs_mhz: (0..n_chan)
            .map(|i| 1500.0 - (i as f64 + 0.5) * 300.0 / n_chan as f64)
            .collect(),
        chan_bw_mhz: 300.0 / n_chan as f64,
        weights: vec![1.0; n_chan],
        n_samples,
        nbits,
        sefd_jy: None,
        beam: None,
    };
    let container = Container::detect(path).unwrap_or(Container::Fits);
    let mut sink = obs::create(path, &header, container)?;
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let rows_per_chunk = 4096;
    let mut bytes = vec![0u8; rows_per_chunk * n_chan];
    let mut values = vec![0f32; rows_per_chunk * n_chan];
    let mut left = n_samples;
    let start = Instant::now();
    while left > 0 {
        let rows = left.min(rows_per_chunk as u64) as usize;
        rng.fill_bytes(&mut bytes[..rows * n_chan]);
        for (v, &b) in values.iter_mut().zip(&bytes[..rows * n_chan]) {
            *v = b as f32;
        }
        sink.write_rows(&values[..rows * n_chan])?;
        left -= rows as u64;
    }
    sink.finish()?;
    eprintln!(
        "wrote {} samples × {n_chan} channels in {:.1} s",
        n_samples,
        start.elapsed().as_secs_f64()
    );
    Ok(())
}

fn read(path: &Path) -> Result<(), Box<dyn std::error::Error>> {
    let bytes_on_disk = match Container::detect(path)? {
        Container::Native => std::fs::metadata(path.with_extension("npy"))?.len(),
        Container::Fits => std::fs::metadata(path)?.len(),
    };
    let start = Instant::now();
    let mut src = obs::open(path)?;
    let n_chan = src.header().n_chan();
    let mut buf = vec![0f32; 4096 * n_chan];
    let (mut rows, mut checksum) = (0u64, 0f64);
    loop {
        let n = src.read_rows(&mut buf)?;
        if n == 0 {
            break;
        }
        rows += n as u64;
        // Touch the data so the read cannot be optimised away.
        checksum += buf[..n * n_chan]
            .iter()
            .step_by(97)
            .map(|&v| v as f64)
            .sum::<f64>();
    }
    let secs = start.elapsed().as_secs_f64();
    let samples = rows * n_chan as u64;
    println!(
        "{}: {rows} rows, {samples} samples in {secs:.2} s: {:.0} MB/s, {:.3e} samples/s (checksum {checksum:.0})",
        path.display(),
        bytes_on_disk as f64 / secs / 1e6,
        samples as f64 / secs
    );
    Ok(())
}

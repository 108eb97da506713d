//! Writes the synthetic demo images into a folder (default `demo-images/`):
//!
//! ```text
//! cargo run --release --example make_demo -- demo-images
//! ```
//!
//! The scenario is invented: a small lab images an imaginary diatom slide under
//! a brightfield microscope and also digitises an old ledger; someone took a
//! phone photo of the harbour outside at dusk; the allotment society next door
//! scanned a typed order form, crooked, with the lid ajar. Every image is rendered here
//! from a fixed seed (splitmix64 + Box–Muller) on one thread, so the files are
//! the same on every run (and on every machine whose maths library rounds
//! `exp`, `sin` and `powf` the same way).
//!
//! | file | what it is |
//! | --- | --- |
//! | `diatom-slide.tif` | 512×384 16-bit gray, linear: diatoms on a bright, strongly vignetted field, hot pixels, shot and read noise; 0.65 µm pixels |
//! | `diatom-dark.tif`  | 512×384 16-bit gray, linear: dark frame (bias + dark current + the same hot pixels + read noise) |
//! | `diatom-flat.tif`  | 512×384 16-bit gray, linear: flat frame (the same illumination without specimen, bias and hot pixels included; mean of 16 exposures) |
//! | `ledger-page.png`  | 600×800 8-bit gray: ruled ledger page with handwriting-like entries, skewed by 2.3°, dust specks, 100 dpi |
//! | `harbour-photo.jpg`| 480×320 upright RGB dusk scene, stored sideways (320×480) with EXIF orientation 6, 300 dpi |
//! | `order-form-scan.png` | 1200×1600 8-bit gray: a typed seed order form of an imaginary allotment society, scanned turned 3.1° anticlockwise, scanner lid along the left and bottom, dust, uneven lamp, 150 dpi |
//!
//! The sensor model of the micrograph (all in ADU, analogue-to-digital units):
//! `raw = bias + (E·V·T + D)/g + hot + noise`, with `E` the electrons a pixel
//! collects at the centre of the empty field, `V` the illumination fall-off,
//! `T` the specimen's transmission, `D` the dark current, `g` electrons per ADU.
//! The flat frame is the same with `T = 1`, the dark frame with `E = 0`, so
//! `(raw − dark)/(flat − dark)` recovers `T` up to noise.

use std::f64::consts::PI;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};

fn main() -> Result<()> {
    let dir = PathBuf::from(std::env::args().nth(1).unwrap_or_else(|| "demo-images".into()));
    std::fs::create_dir_all(&dir).with_context(|| format!("creating {}", dir.display()))?;
    micrographs(&dir)?;
    ledger(&dir)?;
    harbour(&dir)?;
    scan_form(&dir)?;
    Ok(())
}

// ---------------------------------------------------------------------------
// Random numbers

/// splitmix64 (Steele, Lea & Flood, "Fast splittable pseudorandom number
/// generators", OOPSLA 2014), with Box–Muller normal deviates.
struct Rng {
    state: u64,
    spare: Option<f64>,
}

impl Rng {
    fn new(seed: u64) -> Rng {
        Rng { state: seed, spare: None }
    }

    fn next_u64(&mut self) -> u64 {
        self.state = self.state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in [0, 1) with 53 random bits.
    fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }

    fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.uniform()
    }

    /// Uniform integer in `lo..hi`.
    fn int(&mut self, lo: usize, hi: usize) -> usize {
        lo + (self.next_u64() % (hi - lo) as u64) as usize
    }

    fn chance(&mut self, p: f64) -> bool {
        self.uniform() < p
    }

    /// Standard normal deviate (Box–Muller transform, both values used).
    fn normal(&mut self) -> f64 {
        if let Some(z) = self.spare.take() {
            return z;
        }
        let u1 = 1.0 - self.uniform(); // (0, 1]: ln is finite
        let u2 = self.uniform();
        let r = (-2.0 * u1.ln()).sqrt();
        let (s, c) = (2.0 * PI * u2).sin_cos();
        self.spare = Some(r * s);
        r * c
    }
}

// ---------------------------------------------------------------------------
// Small helpers

fn smoothstep(e0: f64, e1: f64, x: f64) -> f64 {
    let t = ((x - e0) / (e1 - e0)).clamp(0.0, 1.0);
    t * t * (3.0 - 2.0 * t)
}

fn lerp(a: f64, b: f64, t: f64) -> f64 {
    a + (b - a) * t
}

fn lerp3(a: [f64; 3], b: [f64; 3], t: f64) -> [f64; 3] {
    [lerp(a[0], b[0], t), lerp(a[1], b[1], t), lerp(a[2], b[2], t)]
}

/// IEC 61966-2-1 sRGB encoding of linear light in [0, 1].
fn srgb_encode(v: f64) -> f64 {
    let v = v.clamp(0.0, 1.0);
    if v <= 0.003_130_8 { 12.92 * v } else { 1.055 * v.powf(1.0 / 2.4) - 0.055 }
}

fn to_u8(v: f64) -> u8 {
    (v.clamp(0.0, 1.0) * 255.0).round() as u8
}

/// Smooth value noise: bilinear-smoothstep interpolation of a random lattice
/// with `cell` pixels between lattice points; values in [-1, 1].
struct ValueNoise {
    nx: usize,
    cell: f64,
    lattice: Vec<f64>,
}

impl ValueNoise {
    fn new(rng: &mut Rng, width: f64, height: f64, cell: f64) -> ValueNoise {
        let nx = (width / cell).ceil() as usize + 3;
        let ny = (height / cell).ceil() as usize + 3;
        let lattice = (0..nx * ny).map(|_| rng.range(-1.0, 1.0)).collect();
        ValueNoise { nx, cell, lattice }
    }

    fn at(&self, x: f64, y: f64) -> f64 {
        let ny = self.lattice.len() / self.nx;
        let fx = (x / self.cell + 1.0).clamp(0.0, (self.nx - 2) as f64);
        let fy = (y / self.cell + 1.0).clamp(0.0, (ny - 2) as f64);
        let (ix, iy) = (fx.floor() as usize, fy.floor() as usize);
        let (tx, ty) = (smoothstep(0.0, 1.0, fx - ix as f64), smoothstep(0.0, 1.0, fy - iy as f64));
        let l = |i: usize, j: usize| self.lattice[j * self.nx + i];
        let top = lerp(l(ix, iy), l(ix + 1, iy), tx);
        let bottom = lerp(l(ix, iy + 1), l(ix + 1, iy + 1), tx);
        lerp(top, bottom, ty)
    }
}

/// Supersampling offsets: an n×n grid inside the pixel, centred.
fn subsamples(n: usize) -> Vec<(f64, f64)> {
    let step = 1.0 / n as f64;
    (0..n * n).map(|k| ((k % n) as f64 * step + step / 2.0, (k / n) as f64 * step + step / 2.0)).collect()
}

fn write_file(dir: &Path, name: &str, bytes: &[u8], what: &str) -> Result<()> {
    let path = dir.join(name);
    std::fs::write(&path, bytes).with_context(|| format!("writing {}", path.display()))?;
    println!("{:<20} {:>8} bytes  {what}", name, bytes.len());
    Ok(())
}

// ---------------------------------------------------------------------------
// Micrographs

const MW: usize = 512;
const MH: usize = 384;
/// Bias (offset) the camera adds to every pixel, ADU.
const BIAS: f64 = 1200.0;
/// Electrons a pixel collects at the centre of the empty field.
const FULL_E: f64 = 8_000.0;
/// Conversion gain, electrons per ADU.
const E_PER_ADU: f64 = 0.18;
/// Read noise, electrons (standard deviation).
const READ_E: f64 = 6.0;
/// Dark current over one exposure, electrons.
const DARK_E: f64 = 12.0;
/// Frames averaged into the flat frame.
const FLAT_FRAMES: f64 = 16.0;

/// One diatom valve seen from above.
enum Cell {
    /// Boat-shaped (lanceolate) valve with a raphe along the midline and
    /// transverse, slightly radiating striae.
    Boat { cx: f64, cy: f64, angle: f64, half_len: f64, half_wid: f64, period: f64, tip: f64 },
    /// Elliptical valve crossed by strong ribs with fine striae between them.
    Ribbed { cx: f64, cy: f64, angle: f64, half_len: f64, half_wid: f64, period: f64 },
    /// Circular valve with radial striae, a ring and a dotted central area.
    Disc { cx: f64, cy: f64, radius: f64, ribs: f64, twist: f64 },
}

impl Cell {
    fn bounds(&self) -> (f64, f64, f64) {
        match *self {
            Cell::Boat { cx, cy, half_len, .. } | Cell::Ribbed { cx, cy, half_len, .. } => (cx, cy, half_len),
            Cell::Disc { cx, cy, radius, .. } => (cx, cy, radius),
        }
    }

    /// Optical density (−log transmission) at (x, y); 0 outside the cell.
    fn density(&self, x: f64, y: f64) -> f64 {
        match *self {
            Cell::Boat { cx, cy, angle, half_len, half_wid, period, tip } => {
                let (s, c) = angle.sin_cos();
                let (dx, dy) = (x - cx, y - cy);
                let (u, v) = (dx * c + dy * s, -dx * s + dy * c);
                let t = u / half_len;
                if t.abs() >= 1.0 {
                    return 0.0;
                }
                let hw = half_wid * (1.0 - t * t).powf(tip);
                if v.abs() >= hw {
                    return 0.0;
                }
                let d = v.abs() / hw; // 0 on the midline, 1 at the edge
                let mut od = 0.22;
                od += 0.55 * smoothstep(0.80, 0.97, d); // thick valve margin
                // Striae radiate away from the centre: their phase leans with |v|.
                let q = u + 0.35 * v.abs() * t.signum();
                let stripe = 0.5 + 0.5 * (2.0 * PI * q / period).cos();
                let axial = smoothstep(0.12, 0.22, d) * (1.0 - smoothstep(0.86, 0.95, d));
                let central = 1.0 - smoothstep(0.06, 0.14, t.abs()); // central area has no striae
                od += 0.38 * stripe * stripe * axial * (1.0 - 0.7 * central);
                // Raphe: a fine dark slit along the midline, broken at the central nodule.
                if t.abs() < 0.93 && t.abs() > 0.04 {
                    od += 0.45 * (1.0 - smoothstep(0.35, 0.9, v.abs()));
                }
                od += 0.30 * central * (1.0 - smoothstep(0.15, 0.35, d)); // central nodule
                od += 0.25 * (1.0 - smoothstep(0.0, 0.05, 1.0 - t.abs())); // polar nodules
                od
            }
            Cell::Ribbed { cx, cy, angle, half_len, half_wid, period } => {
                let (s, c) = angle.sin_cos();
                let (dx, dy) = (x - cx, y - cy);
                let (u, v) = (dx * c + dy * s, -dx * s + dy * c);
                let r2 = (u / half_len).powi(2) + (v / half_wid).powi(2);
                if r2 >= 1.0 {
                    return 0.0;
                }
                let d = r2.sqrt();
                let mut od = 0.18 + 0.5 * smoothstep(0.86, 0.97, d);
                // Ribs run across the valve, bending towards the poles.
                let q = u * (1.0 + 0.25 * (v / half_wid).powi(2));
                let rib = 0.5 + 0.5 * (2.0 * PI * q / period).cos();
                // Ribs fade towards the midrib.
                od += 0.42 * rib.powi(6) * (1.0 - 0.6 * (1.0 - smoothstep(0.0, 0.08, (v / half_wid).abs())));
                let fine = 0.5 + 0.5 * (2.0 * PI * q * 3.0 / period).cos();
                od += 0.08 * fine * (1.0 - rib);
                od + 0.25 * (1.0 - smoothstep(0.0, 0.06, (v / half_wid).abs())) // midrib
            }
            Cell::Disc { cx, cy, radius, ribs, twist } => {
                let (dx, dy) = (x - cx, y - cy);
                let rho = (dx * dx + dy * dy).sqrt() / radius;
                if rho >= 1.0 {
                    return 0.0;
                }
                let theta = dy.atan2(dx);
                let mut od = 0.2 + 0.5 * smoothstep(0.88, 0.97, rho);
                let radial = 0.5 + 0.5 * (ribs * (theta + twist * rho)).cos();
                od +=
                    0.35 * radial * radial * smoothstep(0.34, 0.42, rho) * (1.0 - smoothstep(0.9, 0.96, rho));
                od += 0.3 * (1.0 - smoothstep(0.0, 0.03, (rho - 0.36).abs())); // ring around the centre
                if rho < 0.32 {
                    // Central area: a coarse grid of pores.
                    let (gx, gy) = (dx / 4.0, dy / 4.0);
                    let pore = ((gx - gx.round()).powi(2) + (gy - gy.round()).powi(2)).sqrt();
                    od += 0.25 * (1.0 - smoothstep(0.2, 0.38, pore));
                }
                od
            }
        }
    }
}

/// Places the diatoms without overlap (by bounding circles).
fn diatoms(rng: &mut Rng) -> Vec<Cell> {
    let mut cells: Vec<Cell> = Vec::new();
    let fits = |cells: &[Cell], cx: f64, cy: f64, r: f64| {
        cx - r > 6.0
            && cx + r < MW as f64 - 6.0
            && cy - r > 6.0
            && cy + r < MH as f64 - 6.0
            && cells.iter().all(|c| {
                let (x, y, q) = c.bounds();
                ((x - cx).powi(2) + (y - cy).powi(2)).sqrt() > r + q + 4.0
            })
    };
    let kinds = [0, 0, 1, 0, 2, 0, 1, 2, 0, 2, 0];
    for &kind in &kinds {
        for _ in 0..400 {
            let (cx, cy) = (rng.range(0.0, MW as f64), rng.range(0.0, MH as f64));
            let angle = rng.range(0.0, PI);
            let cell = match kind {
                0 => {
                    let half_len = rng.range(38.0, 88.0);
                    Cell::Boat {
                        cx,
                        cy,
                        angle,
                        half_len,
                        half_wid: half_len * rng.range(0.17, 0.27),
                        period: rng.range(3.6, 4.8),
                        tip: rng.range(0.6, 1.1),
                    }
                }
                1 => {
                    let half_len = rng.range(40.0, 62.0);
                    Cell::Ribbed {
                        cx,
                        cy,
                        angle,
                        half_len,
                        half_wid: half_len * rng.range(0.45, 0.6),
                        period: rng.range(6.0, 8.0),
                    }
                }
                _ => Cell::Disc {
                    cx,
                    cy,
                    radius: rng.range(20.0, 38.0),
                    ribs: rng.int(40, 64) as f64,
                    twist: rng.range(-0.4, 0.4),
                },
            };
            let (x, y, r) = cell.bounds();
            if fits(&cells, x, y, r) {
                cells.push(cell);
                break;
            }
        }
    }
    cells
}

/// Separable Gaussian blur with edge samples repeated (the optics' blur).
fn blur(data: &[f64], w: usize, h: usize, sigma: f64) -> Vec<f64> {
    let r = (3.0 * sigma).ceil() as isize;
    let k: Vec<f64> = (-r..=r).map(|i| (-(i * i) as f64 / (2.0 * sigma * sigma)).exp()).collect();
    let sum: f64 = k.iter().sum();
    let k: Vec<f64> = k.iter().map(|v| v / sum).collect();
    let clampi = |v: isize, n: usize| v.clamp(0, n as isize - 1) as usize;
    let mut tmp = vec![0.0; w * h];
    for y in 0..h {
        for x in 0..w {
            tmp[y * w + x] =
                (-r..=r).map(|i| k[(i + r) as usize] * data[y * w + clampi(x as isize + i, w)]).sum();
        }
    }
    let mut out = vec![0.0; w * h];
    for y in 0..h {
        for x in 0..w {
            out[y * w + x] =
                (-r..=r).map(|i| k[(i + r) as usize] * tmp[clampi(y as isize + i, h) * w + x]).sum();
        }
    }
    out
}

/// Relative illumination of the field: natural fall-off (1 + (r/r0)²)⁻² around
/// an optical axis a little off the sensor centre, a slight tilt, and the faint
/// out-of-focus shadows of two dust motes in the illumination path.
fn illumination(x: f64, y: f64) -> f64 {
    let (ax, ay) = (0.53 * MW as f64, 0.46 * MH as f64);
    let half_diag = ((MW * MW + MH * MH) as f64).sqrt() / 2.0;
    let r = ((x - ax).powi(2) + (y - ay).powi(2)).sqrt() / half_diag;
    let falloff = (1.0 + (r / 1.25).powi(2)).powi(-2);
    let tilt = 1.0 - 0.05 * (x / MW as f64 - 0.5);
    let mut motes = 1.0;
    for (mx, my, radius, depth) in [(120.0, 290.0, 16.0, 0.06), (400.0, 80.0, 11.0, 0.045)] {
        let d = ((x - mx).powi(2) + (y - my).powi(2)).sqrt() / radius;
        // A soft ring with a lighter centre, as an out-of-focus speck casts.
        let ring = (-((d - 0.8) / 0.25).powi(2)).exp() + 0.5 * (-(d / 0.6).powi(2)).exp();
        motes *= 1.0 - depth * ring;
    }
    falloff * tilt * motes
}

fn micrographs(dir: &Path) -> Result<()> {
    let mut rng = Rng::new(0x_D1A7_0A5E_0001);
    let cells = diatoms(&mut rng);

    // Debris in the mounting medium: small dark specks (before the optical blur).
    let debris: Vec<(f64, f64, f64, f64)> = (0..12)
        .map(|_| {
            (rng.range(0.0, MW as f64), rng.range(0.0, MH as f64), rng.range(0.6, 2.2), rng.range(0.15, 0.9))
        })
        .collect();

    // Transmission, supersampled 3×3, then blurred by the optics.
    let sub = subsamples(3);
    let mut transmission = vec![1.0; MW * MH];
    for (y, row) in transmission.chunks_mut(MW).enumerate() {
        for (x, t) in row.iter_mut().enumerate() {
            let near: Vec<&Cell> = cells
                .iter()
                .filter(|c| {
                    let (cx, cy, r) = c.bounds();
                    (x as f64 - cx).abs() < r + 2.0 && (y as f64 - cy).abs() < r + 2.0
                })
                .collect();
            let near_debris: Vec<_> = debris
                .iter()
                .filter(|d| (x as f64 - d.0).abs() < d.2 + 2.0 && (y as f64 - d.1).abs() < d.2 + 2.0)
                .collect();
            if near.is_empty() && near_debris.is_empty() {
                continue;
            }
            let mut acc = 0.0;
            for &(ox, oy) in &sub {
                let (px, py) = (x as f64 + ox, y as f64 + oy);
                let mut od: f64 = near.iter().map(|c| c.density(px, py)).sum();
                for d in &near_debris {
                    if (px - d.0).powi(2) + (py - d.1).powi(2) < d.2 * d.2 {
                        od += d.3;
                    }
                }
                acc += (-od).exp();
            }
            *t = acc / sub.len() as f64;
        }
    }
    let transmission = blur(&transmission, MW, MH, 0.7);

    // Hot pixels: extra dark signal in ADU, the same in every frame.
    let mut hot = vec![0.0; MW * MH];
    for _ in 0..14 {
        let i = rng.int(0, MW * MH);
        hot[i] = rng.range(8.0, 10.3).exp(); // about 3 000 to 30 000 ADU
    }

    let illum: Vec<f64> =
        (0..MW * MH).map(|i| illumination((i % MW) as f64 + 0.5, (i / MW) as f64 + 0.5)).collect();

    // One frame: `signal(i)` electrons of light at pixel i, averaged over `frames` exposures.
    let frame = |signal: &dyn Fn(usize) -> f64, frames: f64, rng: &mut Rng| -> Vec<u16> {
        (0..MW * MH)
            .map(|i| {
                let e = signal(i) + DARK_E;
                let noise_e = (e + READ_E * READ_E).sqrt() / frames.sqrt();
                let adu = BIAS + hot[i] + (e + noise_e * rng.normal()) / E_PER_ADU;
                adu.round().clamp(0.0, 65535.0) as u16
            })
            .collect()
    };
    let slide = frame(&|i| FULL_E * illum[i] * transmission[i], 1.0, &mut rng);
    let dark = frame(&|_| 0.0, 1.0, &mut rng);
    let flat = frame(&|i| FULL_E * illum[i], FLAT_FRAMES, &mut rng);

    let describe = "Invented demo: imaginary diatom slide, brightfield, 0.65 um pixels, linear 16-bit";
    write_file(
        dir,
        "diatom-slide.tif",
        &tiff16(&slide, &format!("{describe}; specimen"))?,
        "512x384 gray16 linear",
    )?;
    write_file(
        dir,
        "diatom-dark.tif",
        &tiff16(&dark, &format!("{describe}; dark frame"))?,
        "512x384 gray16 linear",
    )?;
    write_file(
        dir,
        "diatom-flat.tif",
        &tiff16(&flat, &format!("{describe}; flat frame, mean of 16"))?,
        "512x384 gray16 linear",
    )?;
    Ok(())
}

/// A 16-bit gray TIFF (Deflate with horizontal predictor) with the pixel pitch
/// as resolution: 0.65 µm pixels = 10 000 / 0.65 = 200 000 / 13 pixels per cm.
fn tiff16(data: &[u16], description: &str) -> Result<Vec<u8>> {
    use tiff::encoder::{Compression, DeflateLevel, Predictor, Rational, TiffEncoder, colortype};
    let mut out = std::io::Cursor::new(Vec::new());
    let mut enc = TiffEncoder::new(&mut out)?
        .with_compression(Compression::Deflate(DeflateLevel::Best))
        .with_predictor(Predictor::Horizontal);
    let mut image = enc.new_image::<colortype::Gray16>(MW as u32, MH as u32)?;
    image.encoder().write_tag(tiff::tags::Tag::ImageDescription, description)?;
    image.resolution(tiff::tags::ResolutionUnit::Centimeter, Rational { n: 200_000, d: 13 });
    image.write_data(data)?;
    Ok(out.into_inner())
}

// ---------------------------------------------------------------------------
// Ledger page

const LW: usize = 600;
const LH: usize = 800;
/// Page size inside the scan, in page pixels.
const PAGE_W: f64 = 560.0;
const PAGE_H: f64 = 770.0;
/// The page's skew in the scan: its ruled lines rise to the right by this angle.
const SKEW_DEG: f64 = 2.3;
const LINE_TOP: f64 = 110.0;
const LINE_GAP: f64 = 26.0;

/// One stroke of ink: an axis-aligned box in page coordinates, slanted by
/// `slant` (x shifts by `slant·(baseline − y)`), with an ink transmission.
#[derive(Clone, Copy)]
struct Stroke {
    x0: f64,
    x1: f64,
    y0: f64,
    y1: f64,
    base: f64,
    slant: f64,
    ink: f64,
}

impl Stroke {
    fn covers(&self, u: f64, v: f64) -> bool {
        let u = u - self.slant * (self.base - v);
        u >= self.x0 && u < self.x1 && v >= self.y0 && v < self.y1
    }
}

/// Handwriting-like words: each glyph is one to three strokes (stems of
/// x-height, ascender or descender height, and bars).
fn write_word(rng: &mut Rng, strokes: &mut Vec<Stroke>, x: f64, width: f64, base: f64, size: f64, ink: f64) {
    let slant = 0.22;
    let pen = 1.15 + 0.25 * size / 8.0;
    let mut gx = x;
    while gx < x + width - 3.0 {
        let gw = rng.range(0.45, 0.85) * size;
        let gw = gw.min(x + width - gx);
        let xh = size * rng.range(0.9, 1.05);
        let ink = ink * rng.range(0.85, 1.15);
        let mut push =
            |x0: f64, x1: f64, y0: f64, y1: f64| strokes.push(Stroke { x0, x1, y0, y1, base, slant, ink });
        match (rng.next_u64() % 6) as u8 {
            0 => push(gx, gx + pen, base - 1.6 * size, base), // ascender stem (l, d, h)
            1 => push(gx, gx + pen, base - xh, base + 0.55 * size), // descender stem (p, q)
            _ => push(gx, gx + pen, base - xh, base),         // x-height stem
        }
        if rng.chance(0.6) {
            push(gx + gw - pen, gx + gw, base - xh, base); // second stem (n, u, o)
        }
        if rng.chance(0.5) {
            push(gx, gx + gw, base - xh, base - xh + pen); // top bar
        }
        if rng.chance(0.45) {
            push(gx, gx + gw, base - pen, base); // bottom bar
        }
        gx += gw + rng.range(0.8, 2.0);
    }
}

fn ledger_strokes(rng: &mut Rng) -> Vec<Stroke> {
    let mut strokes = Vec::new();
    // Heading, larger and darker.
    let mut x = 150.0;
    for w in [70.0, 38.0, 96.0] {
        write_word(rng, &mut strokes, x, w, 62.0, 13.0, 0.07);
        x += w + 16.0;
    }
    write_word(rng, &mut strokes, 70.0, 40.0, 100.0, 8.0, 0.12); // column heads
    write_word(rng, &mut strokes, 160.0, 84.0, 100.0, 8.0, 0.12);
    write_word(rng, &mut strokes, 430.0, 52.0, 100.0, 8.0, 0.12);
    let rows = ((PAGE_H - 40.0 - LINE_TOP) / LINE_GAP) as usize;
    for row in 0..rows {
        if !rng.chance(0.86) {
            continue;
        }
        let base = LINE_TOP + (row + 1) as f64 * LINE_GAP - 6.0;
        let ink = rng.range(0.08, 0.2); // each entry written with its own pen and ink
        // Date column: day and month.
        let (day, month) = (rng.range(10.0, 16.0), rng.range(18.0, 36.0));
        write_word(rng, &mut strokes, 70.0, day, base, 8.0, ink);
        write_word(rng, &mut strokes, 90.0, month, base, 8.0, ink);
        // Description: words until the column is full.
        let mut x = 150.0;
        let end = 150.0 + rng.range(120.0, 262.0);
        while x < end {
            let w = rng.range(14.0, 58.0).min(end - x);
            if w > 8.0 {
                write_word(rng, &mut strokes, x, w, base, 8.0, ink);
            }
            x += w + rng.range(6.0, 10.0);
        }
        // Amount, right-aligned against the cents rule, then two cents digits.
        let w = rng.range(22.0, 56.0);
        write_word(rng, &mut strokes, 494.0 - w, w, base, 8.0, ink);
        write_word(rng, &mut strokes, 506.0, 12.0, base, 8.0, ink);
    }
    strokes.sort_by(|a, b| a.x0.total_cmp(&b.x0));
    strokes
}

/// The page's reflectance (linear) at page coordinates (u, v), without ink.
fn paper(u: f64, v: f64, mottle: &ValueNoise) -> f64 {
    let mut r = 0.80 * (1.0 + 0.03 * mottle.at(u, v));
    // Ruled lines: faint horizontal rules, a double rule under the column heads.
    let rule = |at: f64, width: f64| 1.0 - smoothstep(width / 2.0 - 0.6, width / 2.0 + 0.6, (v - at).abs());
    let mut line = 0.0f64;
    let rows = ((PAGE_H - 40.0 - LINE_TOP) / LINE_GAP) as usize;
    if v > LINE_TOP - 20.0 && v < PAGE_H - 20.0 && u > 20.0 && u < PAGE_W - 20.0 {
        let k = ((v - LINE_TOP) / LINE_GAP).round().clamp(0.0, rows as f64);
        line = line.max(0.45 * rule(LINE_TOP + k * LINE_GAP, 1.2));
        line = line.max(0.6 * rule(LINE_TOP - 4.0, 1.2));
    }
    // Column rules: double margin rule, then date | description | amount | cents.
    if v > 80.0 && v < PAGE_H - 40.0 {
        let col =
            |at: f64, width: f64| 1.0 - smoothstep(width / 2.0 - 0.6, width / 2.0 + 0.6, (u - at).abs());
        for (at, strength) in [(58.0, 0.5), (62.0, 0.5), (140.0, 0.4), (420.0, 0.4), (500.0, 0.4)] {
            line = line.max(strength * col(at, 1.2));
        }
    }
    r *= 1.0 - line;
    // Shadow of the binding along the left edge.
    r *= 1.0 - 0.22 * (1.0 - smoothstep(0.0, 26.0, u));
    r
}

fn ledger(dir: &Path) -> Result<()> {
    let mut rng = Rng::new(0x_1ED6_E500_0002);
    let strokes = ledger_strokes(&mut rng);
    let max_w = strokes.iter().map(|s| s.x1 - s.x0).fold(0.0, f64::max) + 4.0;
    let mottle = ValueNoise::new(&mut rng, PAGE_W, PAGE_H, 24.0);
    // Dust on the scanner glass: in scan coordinates, not turned with the page.
    let dust: Vec<(f64, f64, f64, f64, f64, f64)> = (0..30)
        .map(|_| {
            let long = rng.range(0.6, 2.4);
            let aspect = if rng.chance(0.25) { rng.range(2.0, 4.0) } else { rng.range(1.0, 1.4) };
            (
                rng.range(0.0, LW as f64),
                rng.range(0.0, LH as f64),
                long,
                long / aspect,
                rng.range(0.0, PI),
                rng.range(0.1, 0.45),
            )
        })
        .collect();

    let (sin, cos) = SKEW_DEG.to_radians().sin_cos();
    let (cx, cy) = (LW as f64 / 2.0, LH as f64 / 2.0);
    let sub = subsamples(4);
    let mut pixels = Vec::with_capacity(LW * LH);
    for y in 0..LH {
        for x in 0..LW {
            let mut acc = 0.0;
            for &(ox, oy) in &sub {
                let (dx, dy) = (x as f64 + ox - cx, y as f64 + oy - cy);
                // Scan → page: the page's +u axis points along (cos, −sin) in the scan.
                let u = dx * cos - dy * sin + PAGE_W / 2.0;
                let v = dx * sin + dy * cos + PAGE_H / 2.0;
                let r = if (0.0..PAGE_W).contains(&u) && (0.0..PAGE_H).contains(&v) {
                    let mut r = paper(u, v, &mottle);
                    let first = strokes.partition_point(|s| s.x0 < u - max_w);
                    for s in &strokes[first..] {
                        if s.x0 > u + 4.0 {
                            break;
                        }
                        if s.covers(u, v) {
                            r *= s.ink.min(1.0);
                            break;
                        }
                    }
                    r
                } else {
                    0.05 // the scanner lid
                };
                acc += r;
            }
            let (px, py) = (x as f64 + 0.5, y as f64 + 0.5);
            let mut r = acc / sub.len() as f64;
            for &(dx0, dy0, a, b, ang, ink) in &dust {
                let (s, c) = ang.sin_cos();
                let (ex, ey) = (px - dx0, py - dy0);
                let (p, q) = ((ex * c + ey * s) / a, (-ex * s + ey * c) / b);
                let d = (p * p + q * q).sqrt();
                r *= 1.0 - (1.0 - ink) * (1.0 - smoothstep(0.7, 1.3, d));
            }
            // Scanner lamp: slightly brighter at the top left.
            r *= 1.0 - 0.07 * (px / LW as f64) - 0.04 * (py / LH as f64);
            let v = srgb_encode(r) + 0.006 * rng.normal();
            pixels.push(to_u8(v));
        }
    }

    let mut out = Vec::new();
    let mut info = png::Info::with_size(LW as u32, LH as u32);
    info.color_type = png::ColorType::Grayscale;
    info.bit_depth = png::BitDepth::Eight;
    // 100 dpi = 100 / 0.0254 = 3937.0 pixels per metre.
    info.pixel_dims = Some(png::PixelDimensions { xppu: 3937, yppu: 3937, unit: png::Unit::Meter });
    let mut encoder = png::Encoder::with_info(&mut out, info)?;
    encoder.set_compression(png::Compression::High);
    let mut writer = encoder.write_header()?;
    writer.write_image_data(&pixels)?;
    writer.finish()?;
    write_file(dir, "ledger-page.png", &out, "600x800 gray8, skew 2.3 deg (rules rise to the right)")
}

// ---------------------------------------------------------------------------
// Harbour photo

const HW: usize = 480;
const HH: usize = 320;
const HORIZON: f64 = 176.0;
const SUN: (f64, f64, f64) = (318.0, HORIZON - 7.0, 11.0);

/// A boat silhouette: hull between `x0` and `x1` with its waterline at `water`.
struct Boat {
    x0: f64,
    x1: f64,
    water: f64,
    /// Hull height above the waterline.
    hull: f64,
    /// Cabin: offset from `x0`, width, height above the deck.
    cabin: (f64, f64, f64),
    /// Mast: offset from `x0`, height above the deck.
    mast: Option<(f64, f64)>,
    /// A lit window: offset from `x0`, and its row in the picture.
    lamp: Option<(f64, f64)>,
}

impl Boat {
    /// Coverage of the boat at (x, y): 1 inside, 0 outside (a hard shape; the
    /// supersampling smooths it).
    fn covers(&self, x: f64, y: f64) -> bool {
        let len = self.x1 - self.x0;
        // Hull: deck line from x0 to x1, bottom shorter (raked bow and stern).
        if y <= self.water && y >= self.water - self.hull {
            let t = (self.water - y) / self.hull; // 0 at the waterline, 1 at the deck
            let left = self.x0 + 0.12 * len * (1.0 - t);
            let right = self.x1 - 0.05 * len * (1.0 - t) + 0.06 * len * t;
            if x >= left && x <= right {
                return true;
            }
        }
        let deck = self.water - self.hull;
        let (cx0, cw, ch) = self.cabin;
        if x >= self.x0 + cx0 && x <= self.x0 + cx0 + cw && y <= deck && y >= deck - ch {
            return true;
        }
        if let Some((mx, mh)) = self.mast {
            let mx = self.x0 + mx;
            if (x - mx).abs() < 0.6 && y <= deck && y >= deck - mh {
                return true;
            }
            // Stays from the masthead to bow and stern.
            let top = (mx, deck - mh);
            for end in [(self.x0 + 0.02 * len, deck), (self.x1 + 0.04 * len, deck)] {
                if segment_distance((x, y), top, end) < 0.35 {
                    return true;
                }
            }
        }
        false
    }
}

fn segment_distance(p: (f64, f64), a: (f64, f64), b: (f64, f64)) -> f64 {
    let (abx, aby) = (b.0 - a.0, b.1 - a.1);
    let t = (((p.0 - a.0) * abx + (p.1 - a.1) * aby) / (abx * abx + aby * aby)).clamp(0.0, 1.0);
    ((p.0 - a.0 - t * abx).powi(2) + (p.1 - a.1 - t * aby).powi(2)).sqrt()
}

/// Sky colour (linear RGB) at (x, y), sun and glow included.
fn sky(x: f64, y: f64, clouds: &ValueNoise) -> [f64; 3] {
    let t = (y / HORIZON).clamp(0.0, 1.0);
    let top = [0.012, 0.016, 0.07];
    let mid = [0.16, 0.06, 0.16];
    let low = [0.85, 0.32, 0.07];
    let mut c = if t < 0.55 {
        lerp3(top, mid, smoothstep(0.0, 0.55, t))
    } else {
        lerp3(mid, low, smoothstep(0.55, 1.0, t))
    };
    let d = ((x - SUN.0).powi(2) + ((y - SUN.1) * 1.6).powi(2)).sqrt();
    let glow = (-d / 55.0).exp();
    c = [c[0] + 0.9 * glow, c[1] + 0.38 * glow, c[2] + 0.06 * glow];
    if d < SUN.2 * 1.6 && ((x - SUN.0).powi(2) + (y - SUN.1).powi(2)).sqrt() < SUN.2 {
        c = [1.0, 0.82, 0.45];
    }
    // Thin cloud bands, dark purple, lit underneath near the sun.
    let band = (0.5 + 0.5 * clouds.at(x * 0.35, y * 2.2))
        * smoothstep(20.0, 70.0, y)
        * (1.0 - smoothstep(130.0, 160.0, y));
    let density = smoothstep(0.55, 0.8, band);
    let lit = (-((x - SUN.0).abs() / 160.0)).exp();
    let cloud = [0.05 + 0.5 * lit, 0.025 + 0.16 * lit, 0.05 + 0.03 * lit];
    lerp3(c, cloud, 0.85 * density)
}

/// Far shore height above the horizon at x (a headland on the left, a low
/// breakwater to the right).
fn shore(x: f64) -> f64 {
    let hills = 14.0 + 8.0 * (x / 37.0).sin() + 5.0 * (x / 13.0 + 1.0).sin() + 3.0 * (x / 5.3).sin();
    let fade = 1.0 - smoothstep(150.0, 260.0, x);
    (hills * fade).max(if (x / 9.0).sin() > 0.8 { 4.0 } else { 3.0 })
}

fn harbour(dir: &Path) -> Result<()> {
    let mut rng = Rng::new(0x_4A2B_0C0A_0003);
    let clouds = ValueNoise::new(&mut rng, HW as f64, HH as f64 * 2.2, 18.0);
    let lights: Vec<(f64, f64)> = (0..26)
        .map(|_| {
            let x = rng.range(8.0, 250.0);
            (x, HORIZON - rng.range(1.5, shore(x) - 1.0).max(1.5))
        })
        .collect();
    let boats = [
        Boat {
            x0: 60.0,
            x1: 118.0,
            water: 196.0,
            hull: 7.0,
            cabin: (18.0, 16.0, 6.0),
            mast: Some((26.0, 62.0)),
            lamp: None,
        },
        Boat {
            x0: 196.0,
            x1: 236.0,
            water: 188.0,
            hull: 5.0,
            cabin: (10.0, 12.0, 4.0),
            mast: Some((17.0, 42.0)),
            lamp: Some((16.0, 185.0)),
        },
        Boat {
            x0: 352.0,
            x1: 452.0,
            water: 236.0,
            hull: 12.0,
            cabin: (30.0, 34.0, 12.0),
            mast: Some((48.0, 96.0)),
            lamp: Some((40.0, 218.0)),
        },
    ];
    let ripples = ValueNoise::new(&mut rng, HW as f64 * 0.8 + 60.0, 200.0, 3.0);

    // Everything above the water, boats included.
    let above = |x: f64, y: f64| -> [f64; 3] {
        let mut c = sky(x, y, &clouds);
        if y <= HORIZON && y >= HORIZON - shore(x) {
            c = [0.012, 0.011, 0.02];
        }
        // Lighthouse on the breakwater's end.
        if (x - 440.0).abs() < 3.0 && (HORIZON - 30.0..=HORIZON - 3.0).contains(&y) {
            c = [0.015, 0.012, 0.02];
        }
        c
    };
    let boat_at = |x: f64, y: f64| boats.iter().rev().find(|b| b.covers(x, y));

    let sub = subsamples(3);
    let mut upright = vec![[0.0f64; 3]; HW * HH];
    for y in 0..HH {
        for x in 0..HW {
            let mut acc = [0.0; 3];
            for &(ox, oy) in &sub {
                let (px, py) = (x as f64 + ox, y as f64 + oy);
                let mut c = if py < HORIZON {
                    above(px, py)
                } else {
                    // Water: the sky mirrored about the horizon, broken up by ripples.
                    // In perspective the wave rows get taller and wider towards the
                    // viewer (period ∝ √distance below the horizon), and so does the
                    // displacement of the mirror image.
                    let below = py - HORIZON + 0.5;
                    let depth = below / (HH as f64 - HORIZON);
                    let amp = 1.5 + 0.2 * below;
                    let (wx, wy) = (px * 0.26 / below.sqrt(), 4.2 * below.sqrt());
                    let wobble = ripples.at(wx, wy);
                    let my = 2.0 * HORIZON - py + amp * wobble;
                    let mx = px + 0.6 * amp * ripples.at(wx * 0.5 + 50.0, wy * 0.7 + 100.0);
                    let r = above(mx, my.min(HORIZON - 0.01));
                    // Tilted wave facets reflect brighter or darker parts of the sky:
                    // horizontal streaks, and a broken glitter path under the sun.
                    let fresnel = (0.35 + 0.3 * (1.0 - depth)) * (1.0 + 0.6 * wobble);
                    let mut c = [0.004 + fresnel * r[0], 0.006 + fresnel * r[1], 0.014 + fresnel * r[2]];
                    let path = (-((px - SUN.0) / (6.0 + 0.3 * below)).powi(2)).exp();
                    let glint = smoothstep(0.25, 0.6, ripples.at(wx * 2.0 + 20.0, wy * 1.5 + 30.0));
                    let g = 1.4 * path * glint * (1.0 - 0.6 * depth);
                    c = [c[0] + g, c[1] + 0.55 * g, c[2] + 0.15 * g];
                    // Reflections of the boats, about their own waterlines.
                    for b in &boats {
                        if py > b.water && b.covers(mx, 2.0 * b.water - py + 0.5 * amp * wobble) {
                            c = [c[0] * 0.25, c[1] * 0.25, c[2] * 0.3];
                        }
                    }
                    c
                };
                if boat_at(px, py).is_some() {
                    c = [0.01, 0.009, 0.014];
                }
                for b in &boats {
                    if let Some((lx, ly)) = b.lamp {
                        let d2 = (px - b.x0 - lx).powi(2) + (py - ly).powi(2);
                        let glow = 1.5 * (-d2 / 2.0).exp();
                        c = [c[0] + glow, c[1] + 0.7 * glow, c[2] + 0.3 * glow];
                    }
                }
                for &(lx, ly) in &lights {
                    let d2 = (px - lx).powi(2) + (py - ly).powi(2);
                    let glow = 0.9 * (-d2 / 0.5).exp();
                    c = [c[0] + glow, c[1] + 0.6 * glow, c[2] + 0.25 * glow];
                }
                // The lighthouse lamp.
                let d2 = (px - 440.0).powi(2) + (py - (HORIZON - 31.0)).powi(2);
                let beacon = 2.0 * (-d2 / 3.0).exp();
                c = [c[0] + beacon, c[1] + beacon * 0.9, c[2] + beacon * 0.7];
                for k in 0..3 {
                    acc[k] += c[k];
                }
            }
            upright[y * HW + x] = acc.map(|v| v / sub.len() as f64);
        }
    }

    // A gentle lens vignette, sRGB encoding and a little sensor noise.
    let mut upright8 = vec![[0u8; 3]; HW * HH];
    for (i, c) in upright.iter().enumerate() {
        let (x, y) = ((i % HW) as f64 / HW as f64 - 0.5, (i / HW) as f64 / HH as f64 - 0.5);
        let vig = 1.0 - 0.35 * (x * x + y * y);
        let n = 0.008 * rng.normal();
        upright8[i] = c.map(|v| to_u8(srgb_encode(v * vig) + n));
    }

    // Stored sideways: S = U turned 90° anticlockwise, S is HH wide and HW tall.
    // S(c, r) = U(HW − 1 − r, c): S's 0th row is U's right side and S's 0th
    // column is U's top, which is what orientation 6 records (EXIF 2.32 §4.6.4 A),
    // so a viewer turns S 90° clockwise to show U.
    let (sw, sh) = (HH, HW);
    let mut stored = Vec::with_capacity(sw * sh * 3);
    for r in 0..sh {
        for c in 0..sw {
            stored.extend_from_slice(&upright8[c * HW + (HW - 1 - r)]);
        }
    }

    use jpeg_encoder::{ColorType, Encoder, PixelDensity, PixelDensityUnit};
    let mut out = Vec::new();
    let mut enc = Encoder::new(&mut out, 88);
    enc.set_density(PixelDensity { density: (300, 300), unit: PixelDensityUnit::Inches });
    enc.add_exif_metadata(&pumice::io::exif::minimal_with_orientation(6, false))?;
    enc.encode(&stored, sw as u16, sh as u16, ColorType::Rgb)?;
    write_file(dir, "harbour-photo.jpg", &out, "stored 320x480, EXIF orientation 6 (upright 480x320)")
}

// ---------------------------------------------------------------------------
// Scanned order form

/// Scan size, pixels (150 dpi).
const FW: usize = 1200;
const FH: usize = 1600;
/// How far the form is turned clockwise in the scan, degrees (negative: anticlockwise).
const FORM_SKEW_DEG: f64 = -3.1;
/// The scanner lid showing along the left and bottom edges of the scan, pixels.
const LID_LEFT: usize = 36;
const LID_BOTTOM: usize = 48;

/// One typed glyph: a box on the form, in form coordinates, with its ink.
#[derive(Clone, Copy)]
struct Glyph {
    x0: f64,
    x1: f64,
    y0: f64,
    y1: f64,
    ink: f64,
}

/// A typed line: glyph boxes of a worn typewriter (x-height 11 px, some taller
/// ones, 2–3 px between glyphs), words of 2–9 glyphs, in lines of 30 px.
fn typed_line(rng: &mut Rng, glyphs: &mut Vec<Glyph>, x: f64, end: f64, base: f64) {
    let mut x = x;
    while x < end - 20.0 {
        let letters = rng.int(2, 10);
        for _ in 0..letters {
            let w = rng.range(6.0, 9.5);
            if x + w > end {
                break;
            }
            let tall = rng.chance(0.3);
            let y0 = base - if tall { 16.0 } else { 11.0 };
            let ink = rng.range(0.06, 0.16); // the ribbon is uneven
            glyphs.push(Glyph { x0: x, x1: x + w, y0, y1: base, ink });
            x += w + rng.range(2.0, 3.2);
        }
        x += rng.range(9.0, 14.0);
    }
}

/// The form's typed text and its rules (horizontal and vertical boxes), in
/// form coordinates (the form is FW × FH like the scan, before the turn).
fn order_form(rng: &mut Rng) -> (Vec<Glyph>, Vec<Glyph>) {
    let mut glyphs = Vec::new();
    let mut rules = Vec::new();
    let rule = |x0: f64, x1: f64, y0: f64, y1: f64| Glyph { x0, x1, y0, y1, ink: 0.12 };
    // Heading and a thick bar under it.
    typed_line(rng, &mut glyphs, 300.0, 900.0, 150.0);
    rules.push(rule(120.0, 1080.0, 175.0, 181.0));
    // Two short address lines.
    for k in 0..3 {
        let end = 140.0 + rng.range(260.0, 520.0);
        typed_line(rng, &mut glyphs, 140.0, end, 230.0 + 30.0 * k as f64);
    }
    // The order table: a ruled grid of 26 rows, columns for quantity, item, price.
    let (top, pitch, rows) = (360.0, 36.0, 26);
    for r in 0..=rows {
        let y = top + r as f64 * pitch;
        rules.push(rule(120.0, 1080.0, y, y + 2.0));
    }
    let bottom = top + rows as f64 * pitch + 2.0;
    for x in [120.0, 220.0, 860.0, 1078.0] {
        rules.push(rule(x, x + 2.0, top, bottom));
    }
    for r in 0..rows {
        if !rng.chance(0.8) {
            continue;
        }
        let base = top + (r + 1) as f64 * pitch - 10.0;
        for (x, lo, hi) in [(140.0, 30.0, 60.0), (240.0, 180.0, 590.0), (900.0, 70.0, 160.0)] {
            let end = x + rng.range(lo, hi);
            typed_line(rng, &mut glyphs, x, end, base);
        }
    }
    // A closing paragraph below the table.
    for k in 0..4 {
        let end = if k == 3 { 640.0 } else { 1060.0 };
        typed_line(rng, &mut glyphs, 140.0, end, bottom + 60.0 + 30.0 * k as f64);
    }
    glyphs.sort_by(|a, b| a.y0.total_cmp(&b.y0));
    (glyphs, rules)
}

/// The ink of the first box of `set` covering (u, v), if any.
fn ink_at(set: &[Glyph], u: f64, v: f64) -> Option<f64> {
    set.iter().find(|g| u >= g.x0 && u < g.x1 && v >= g.y0 && v < g.y1).map(|g| g.ink)
}

fn scan_form(dir: &Path) -> Result<()> {
    let mut rng = Rng::new(0x_0DE5_0F0E_0003);
    let (glyphs, rules) = order_form(&mut rng);
    let mottle = ValueNoise::new(&mut rng, FW as f64, FH as f64, 40.0);
    // Dust on the glass, in scan coordinates: (x, y, radius, darkness).
    let dust: Vec<(f64, f64, f64, f64)> = (0..70)
        .map(|_| {
            (
                rng.range(LID_LEFT as f64, FW as f64),
                rng.range(0.0, (FH - LID_BOTTOM) as f64),
                rng.range(0.5, 1.5),
                rng.range(0.5, 0.9),
            )
        })
        .collect();
    let (sin, cos) = FORM_SKEW_DEG.to_radians().sin_cos();
    let (cx, cy) = (FW as f64 / 2.0, FH as f64 / 2.0);
    let sub = subsamples(2);
    let mut pixels = Vec::with_capacity(FW * FH);
    for y in 0..FH {
        for x in 0..FW {
            let (px, py) = (x as f64 + 0.5, y as f64 + 0.5);
            if x < LID_LEFT || y >= FH - LID_BOTTOM {
                // The black scanner lid: nearly uniform.
                pixels.push(to_u8(0.07 + 0.004 * rng.normal()));
                continue;
            }
            let mut acc = 0.0;
            for &(ox, oy) in &sub {
                let (dx, dy) = (x as f64 + ox - cx, y as f64 + oy - cy);
                // Scan → form: undo the clockwise turn by FORM_SKEW_DEG.
                let u = cos * dx + sin * dy + cx;
                let v = -sin * dx + cos * dy + cy;
                // Cream paper, yellowing towards the right edge, with mottling.
                let mut r = 0.78 * (1.0 + 0.04 * mottle.at(u, v)) * (1.0 - 0.10 * (u / FW as f64));
                let first = glyphs.partition_point(|g| g.y0 < v - 17.0);
                let near = &glyphs[first..glyphs.partition_point(|g| g.y0 <= v)];
                if let Some(ink) = ink_at(near, u, v).or_else(|| ink_at(&rules, u, v)) {
                    r *= ink;
                }
                acc += r;
            }
            let mut r = acc / sub.len() as f64;
            for &(dx0, dy0, rad, dark) in &dust {
                let d = ((px - dx0).powi(2) + (py - dy0).powi(2)).sqrt();
                r *= 1.0 - dark * (1.0 - smoothstep(rad - 0.5, rad + 0.5, d));
            }
            // Uneven lamp: darker towards the bottom right.
            r *= 1.0 - 0.12 * (px / FW as f64) * (py / FH as f64);
            pixels.push(to_u8(srgb_encode(r) + 0.004 * rng.normal()));
        }
    }
    let mut out = Vec::new();
    let mut info = png::Info::with_size(FW as u32, FH as u32);
    info.color_type = png::ColorType::Grayscale;
    info.bit_depth = png::BitDepth::Eight;
    // 150 dpi = 150 / 0.0254 = 5905.5 pixels per metre.
    info.pixel_dims = Some(png::PixelDimensions { xppu: 5906, yppu: 5906, unit: png::Unit::Meter });
    let mut encoder = png::Encoder::with_info(&mut out, info)?;
    encoder.set_compression(png::Compression::High);
    let mut writer = encoder.write_header()?;
    writer.write_image_data(&pixels)?;
    writer.finish()?;
    write_file(
        dir,
        "order-form-scan.png",
        &out,
        "1200x1600 gray8, skew -3.1 deg, scanner lid left 36 px and bottom 48 px, dust, 150 dpi",
    )
}

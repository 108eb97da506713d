//! Threshold operators: `binarize` (fixed, Otsu, Sauvola). They turn one
//! gray channel into 0/1; histograms come from `ops::histogram`, local
//! statistics from band-local integral images. Colour conversion is not done
//! here beyond taking the luma of colour input.

use crate::color::luma;
use crate::error::{Error, ParamError};
use crate::ops::histogram::{self, Binning};
use crate::ops::params::{Args, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{Layout, Plane, Raster};
use crate::tile::{self, Border};

/// The text of `pumice ops binarize`, also the doc of [`Binarize`].
macro_rules! binarize_doc {
    () => {
        "Splits the image into foreground (1) and background (0): a gray image of
exact 0 and 1 samples, which the encoder writes as 0 and full scale at the
chosen depth; alpha is kept. Colour input is first reduced to its BT.709 luma
Y' = 0.2126 R' + 0.7152 G' + 0.0722 B' of the encoded values (ITU-R BT.709-6 §3.3).

```text
foreground=bright (default): out = 1 where in > T, else 0
foreground=dark:             out = 1 where in ≤ T, else 0   (ink on paper)

fixed:   T = threshold                        (a sample value, 0..1 for integer sources)
otsu:    T = the bin centre t maximising the between-class variance
             ω0(t)·ω1(t)·(μ0(t) − μ1(t))²     over the histogram (Otsu 1979)
sauvola: T(x, y) = m·(1 + k·(s/r − 1))        m, s: mean and standard deviation of the
             window×window neighbourhood (population form), per pixel (Sauvola 2000)
```

Otsu's histogram: one bin per code for 8- and 16-bit sources (codes from the
smallest to the largest present), `bins` equal bins between the minimum and
maximum for float data; T is a bin centre, so it is a code for integer sources.
A constant image has T = its value, so everything is background.
Sauvola: r is the dynamic range of s; the default 0.5 is half the [0, 1] value
range (the paper's R = 128 of 256 levels is r = 128/255). Local sums come from
integral images (summed-area tables) in f64 per band of rows, so the cost per
pixel does not grow with the window. Border: mirror (edge sample not repeated),
halo window/2 rows. NaN samples count as background and, for Sauvola, poison
the statistics of windows that contain them.
Domain: encoded values. Sources: N. Otsu, \"A threshold selection method from
gray-level histograms\", IEEE Trans. SMC 9(1):62–66, 1979; J. Sauvola and
M. Pietikäinen, \"Adaptive document image binarization\", Pattern Recognition
33(2):225–236, 2000; integral images: F. C. Crow, \"Summed-area tables for
texture mapping\", SIGGRAPH 1984."
    };
}

/// How the threshold is found.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Method {
    Fixed(f32),
    Otsu { bins: usize },
    Sauvola { window: usize, k: f64, r: f64 },
}

#[doc = binarize_doc!()]
#[derive(Debug)]
pub struct Binarize {
    method: Method,
    /// True: 1 where in ≤ T (dark foreground).
    dark: bool,
}

impl Binarize {
    pub fn new(method: Method, dark: bool) -> Result<Binarize, ParamError> {
        match method {
            Method::Fixed(t) if !(0.0..=1.0).contains(&t) => {
                return Err(ParamError::new(format!(
                    "threshold {t} is outside the value range 0..1 (samples as stored: code/255 or code/65535)"
                )));
            }
            Method::Otsu { bins } if !(2..=65536).contains(&bins) => {
                return Err(ParamError::new(format!("bins must be within 2..65536, got {bins}")));
            }
            Method::Sauvola { window, k, r } => {
                if window < 1 || window % 2 == 0 {
                    return Err(ParamError::new(format!("window must be an odd number ≥ 1, got {window}")));
                }
                if !(k.is_finite() && r > 0.0 && r.is_finite()) {
                    return Err(ParamError::new(format!(
                        "sauvola needs a finite k and r > 0, got k={k}, r={r}"
                    )));
                }
            }
            _ => {}
        }
        Ok(Binarize { method, dark })
    }

    /// The gray plane thresholded: the plane itself, or the luma of R, G, B.
    fn gray(raster: &Raster) -> Result<Plane, Error> {
        let p = raster.planes();
        if raster.layout().colour_channels() == 1 {
            return Ok(p[0].clone());
        }
        let (w, h) = (raster.width(), raster.height());
        let mut gray = Plane::zeros(w, h)?;
        tile::for_each_band(&mut gray, tile::band_rows(w, 0), |y0, band| {
            let r = y0 * w..y0 * w + band.len();
            let s = |i: usize| &p[i].as_slice()[r.clone()];
            luma::weighted_sum(luma::BT709, s(0), s(1), s(2), band);
        });
        Ok(gray)
    }

    fn set(&self, above: bool) -> f32 {
        if above != self.dark { 1.0 } else { 0.0 }
    }
}

/// Otsu's threshold of `samples` (finite ones) under `binning`: the centre of
/// the bin that ends class 0, maximising ω0·ω1·(μ0 − μ1)² (first maximum on
/// ties). The histogram is trimmed to its first and last non-empty bins first.
/// `None` when no sample is finite.
pub fn otsu_threshold(samples: &[f32], levels: Option<u32>, bins: usize) -> Option<f64> {
    let binning = Binning::for_samples(&[samples], levels, bins)?;
    let counts = histogram::histogram(&[samples], &binning);
    let first = counts.iter().position(|&c| c > 0)?;
    let last = counts.iter().rposition(|&c| c > 0)?;
    if first == last {
        return Some(binning.center(first));
    }
    let c: Vec<f64> = counts[first..=last].iter().map(|&c| c as f64).collect();
    let x: Vec<f64> = (first..=last).map(|i| binning.center(i)).collect();
    let total: f64 = c.iter().sum();
    let total_mass: f64 = c.iter().zip(&x).map(|(c, x)| c * x).sum();
    let (mut w0, mut m0) = (0.0f64, 0.0f64);
    let (mut best, mut best_i) = (f64::NEG_INFINITY, 0);
    for i in 0..c.len() - 1 {
        w0 += c[i];
        m0 += c[i] * x[i];
        let w1 = total - w0;
        if w0 == 0.0 || w1 == 0.0 {
            continue;
        }
        let d = m0 / w0 - (total_mass - m0) / w1;
        let v = w0 * w1 * d * d;
        if v > best {
            best = v;
            best_i = i;
        }
    }
    Some(x[best_i])
}

/// Sauvola's threshold surface of `src` (see the operator doc), written to `out`
/// by bands; each band builds integral images of its rows plus a halo of
/// `window / 2` rows and columns under the mirror rule.
pub fn sauvola_thresholds(src: &Plane, window: usize, k: f64, r: f64) -> Result<Plane, Error> {
    sauvola_map(src, window, k, r, |_, t| t as f32)
}

/// Runs Sauvola's statistics over `src` and writes `emit(in, T)` for each pixel,
/// with T in f64 (so comparisons are not rounded through f32).
fn sauvola_map(
    src: &Plane,
    window: usize,
    k: f64,
    r: f64,
    emit: impl Fn(f32, f64) -> f32 + Sync,
) -> Result<Plane, Error> {
    let (w, h) = (src.width(), src.height());
    let rad = window / 2;
    let mut out = Plane::zeros(w, h)?;
    let rows = 64.max(2 * window).min(h.max(1));
    let pw = w + 2 * rad; // padded width
    let n = (window * window) as f64;
    let border = Border::Mirror;
    let cols: Vec<usize> = (0..pw).map(|j| border.index(j as isize - rad as isize, w).unwrap_or(0)).collect();
    tile::for_each_band(&mut out, rows, |y0, band| {
        let band_rows = band.len() / w;
        let ph = band_rows + 2 * rad;
        let stride = pw + 1;
        // Row 0 and column 0 of both tables are zero (the empty prefix).
        let mut sum = vec![0.0f64; (ph + 1) * stride];
        let mut sq = vec![0.0f64; (ph + 1) * stride];
        for py in 0..ph {
            let sy = border.index(y0 as isize + py as isize - rad as isize, h).unwrap_or(0);
            let row = src.row(sy);
            let (mut rs, mut rq) = (0.0f64, 0.0f64);
            let (above, cur) = (py * stride, (py + 1) * stride);
            for (j, &sx) in cols.iter().enumerate() {
                let v = f64::from(row[sx]);
                rs += v;
                rq += v * v;
                sum[cur + j + 1] = sum[above + j + 1] + rs;
                sq[cur + j + 1] = sq[above + j + 1] + rq;
            }
        }
        for (by, out_row) in band.chunks_exact_mut(w).enumerate() {
            let (top, bottom) = (by * stride, (by + window) * stride);
            let in_row = src.row(y0 + by);
            for (x, o) in out_row.iter_mut().enumerate() {
                let (l, rr) = (x, x + window);
                let s = sum[bottom + rr] - sum[top + rr] - sum[bottom + l] + sum[top + l];
                let q = sq[bottom + rr] - sq[top + rr] - sq[bottom + l] + sq[top + l];
                let m = s / n;
                let sd = (q / n - m * m).max(0.0).sqrt();
                *o = emit(in_row[x], m * (1.0 + k * (sd / r - 1.0)));
            }
        }
    });
    Ok(out)
}

impl Operator for Binarize {
    fn domain(&self) -> Domain {
        Domain::Encoded
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        let gray = Binarize::gray(&raster)?;
        let (w, h) = (raster.width(), raster.height());
        let levels = if raster.layout().colour_channels() == 1 { raster.levels } else { None };
        let (one, zero) = (self.set(true), self.set(false));
        let out = match self.method {
            Method::Fixed(t) => threshold_plane(&gray, f64::from(t), one, zero)?,
            Method::Otsu { bins } => match otsu_threshold(gray.as_slice(), levels, bins) {
                Some(t) => threshold_plane(&gray, t, one, zero)?,
                None => Plane::filled(w, h, zero)?,
            },
            Method::Sauvola { window, k, r } => sauvola_map(&gray, window, k, r, |v, t| {
                if v.is_nan() {
                    0.0
                } else if f64::from(v) > t {
                    one
                } else {
                    zero
                }
            })?,
        };
        let mut planes = vec![out];
        if let Some(a) = raster.alpha() {
            planes.push(a.clone());
        }
        let layout = Layout::Gray.with_alpha(raster.layout().has_alpha());
        let mut out = raster.with_planes(planes, layout)?;
        out.levels = None;
        Ok(out)
    }
}

/// `one` where `in > t`, else `zero`; NaN gives 0 under either polarity. The
/// comparison is in f32 with t rounded to f32, so a threshold that is a code
/// `k/n` equals the sample `k/n` stored for that code (both correctly rounded).
fn threshold_plane(src: &Plane, t: f64, one: f32, zero: f32) -> Result<Plane, Error> {
    let t = t as f32;
    let (w, h) = (src.width(), src.height());
    let mut out = Plane::zeros(w, h)?;
    tile::for_each_band(&mut out, tile::band_rows(w, 0), |y0, band| {
        let s = &src.as_slice()[y0 * w..y0 * w + band.len()];
        for (o, &v) in band.iter_mut().zip(s) {
            *o = if v.is_nan() {
                0.0
            } else if v > t {
                one
            } else {
                zero
            };
        }
    });
    Ok(out)
}

pub static BINARIZE: OpSpec = OpSpec {
    name: "binarize",
    family: "threshold",
    summary: "threshold to 0/1: fixed, Otsu (1979) or Sauvola (2000)",
    doc: binarize_doc!(),
    main: Some("method"),
    params: &[
        ParamSpec {
            name: "method",
            kind: Kind::Choice(&["otsu", "fixed", "sauvola"]),
            default: Some("otsu"),
            help: "how the threshold is found",
        },
        ParamSpec {
            name: "threshold",
            kind: Kind::real(0.0, 1.0),
            default: Some("0.5"),
            help: "method=fixed: the threshold, as a sample value",
        },
        ParamSpec {
            name: "window",
            kind: Kind::int(1.0, 4095.0),
            default: Some("15"),
            help: "method=sauvola: odd window side in pixels",
        },
        ParamSpec {
            name: "k",
            kind: Kind::real(-10.0, 10.0),
            default: Some("0.2"),
            help: "method=sauvola: k",
        },
        ParamSpec {
            name: "r",
            kind: Kind::positive(0.0, 1e6),
            default: Some("0.5"),
            help: "method=sauvola: dynamic range of the standard deviation",
        },
        ParamSpec {
            name: "bins",
            kind: Kind::int(2.0, 65536.0),
            default: Some("256"),
            help: "method=otsu: histogram bins for float data (integer sources use one per code)",
        },
        ParamSpec {
            name: "foreground",
            kind: Kind::Choice(&["bright", "dark"]),
            default: Some("bright"),
            help: "which side of the threshold becomes 1",
        },
    ],
    build: build_binarize,
};

fn build_binarize(a: &Args) -> Result<Box<dyn Operator>, ParamError> {
    let method = match a.choice("method")? {
        "fixed" => Method::Fixed(a.number("threshold")? as f32),
        "sauvola" => {
            Method::Sauvola { window: a.int("window")? as usize, k: a.number("k")?, r: a.number("r")? }
        }
        _ => Method::Otsu { bins: a.int("bins")? as usize },
    };
    Ok(Box::new(Binarize::new(method, a.choice("foreground")? == "dark")?))
}

#[cfg(test)]
mod tests {
    //! Edge cases: 1×1 image, constant image (all background), threshold
    //! outside 0..1 rejected, even or zero window rejected, window larger
    //! than the image, NaN as background, colour input reduced to luma, alpha
    //! kept, dark foreground, serial and parallel results identical, and a
    //! naive O(window²) reference for the integral-image statistics.
    use super::*;
    use crate::raster::Encoding;

    /// ../shared REFERENCES.md [K5]: scikit-image's Otsu test array.
    const K5: [[u32; 5]; 5] =
        [[0, 0, 1, 3, 5], [0, 1, 4, 3, 4], [1, 2, 5, 4, 1], [2, 4, 5, 2, 1], [4, 5, 1, 0, 0]];

    fn k5_plane() -> Plane {
        Plane::from_fn(5, 5, |x, y| K5[y][x] as f32 / 255.0).unwrap()
    }

    fn gray_codes(p: Plane) -> Raster {
        let mut r = Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap();
        r.levels = Some(255);
        r
    }

    fn run(step: &str, r: Raster) -> Raster {
        crate::pipeline::Step::parse(step).unwrap().op.apply(r).unwrap()
    }

    fn bits(p: &Plane) -> Vec<String> {
        (0..p.height())
            .map(|y| p.row(y).iter().map(|&v| if v == 1.0 { '1' } else { '0' }).collect())
            .collect()
    }

    #[test]
    fn otsu_matches_the_scikit_image_test_value() {
        // REFERENCES.md [K5]: scikit-image filters.threshold_otsu on this array → 2.
        let t = otsu_threshold(k5_plane().as_slice(), Some(255), 256).unwrap();
        assert!((t * 255.0 - 2.0).abs() < 1e-9, "{}", t * 255.0);
        let out = run("binarize:otsu", gray_codes(k5_plane()));
        for (v, o) in k5_plane().as_slice().iter().zip(out.planes()[0].as_slice()) {
            assert_eq!(*o, if *v * 255.0 > 2.5 { 1.0 } else { 0.0 });
        }
    }

    #[test]
    fn sauvola_matches_the_published_reference_array() {
        // REFERENCES.md [K6]: window 3, k = 0.2, R = 128 (of 0..255 codes) → rows below.
        let out =
            run(&format!("binarize:sauvola,window=3,k=0.2,r={}", 128.0 / 255.0), gray_codes(k5_plane()));
        assert_eq!(bits(&out.planes()[0]), ["00011", "00111", "00110", "01110", "11000"]);
    }

    #[test]
    fn integral_images_agree_with_a_naive_window() {
        let mut state = 12345u32;
        let p = Plane::from_fn(37, 23, |_, _| {
            state = state.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            (state >> 8) as f32 / (1 << 24) as f32
        })
        .unwrap();
        for window in [1usize, 3, 7, 25, 61] {
            let got = sauvola_thresholds(&p, window, 0.3, 0.5).unwrap();
            let rad = (window / 2) as isize;
            for y in 0..p.height() {
                for x in 0..p.width() {
                    let (mut s, mut q) = (0.0f64, 0.0f64);
                    for dy in -rad..=rad {
                        for dx in -rad..=rad {
                            let sy = Border::Mirror.index(y as isize + dy, p.height()).unwrap();
                            let sx = Border::Mirror.index(x as isize + dx, p.width()).unwrap();
                            let v = f64::from(p.get(sx, sy));
                            s += v;
                            q += v * v;
                        }
                    }
                    let n = (window * window) as f64;
                    let m = s / n;
                    let sd = (q / n - m * m).max(0.0).sqrt();
                    let want = m * (1.0 + 0.3 * (sd / 0.5 - 1.0));
                    let diff = (f64::from(got.get(x, y)) - want).abs();
                    assert!(diff < 1e-6, "window {window} at ({x}, {y}): {diff}");
                }
            }
        }
    }

    #[test]
    fn bad_parameters_are_errors() {
        let e = crate::pipeline::Step::parse("binarize:fixed,threshold=1.5").unwrap_err().to_string();
        assert!(e.contains("threshold"), "{e}");
        assert!(Binarize::new(Method::Fixed(-0.1), false).unwrap_err().0.contains("outside the value range"));
        let e = crate::pipeline::Step::parse("binarize:sauvola,window=4").unwrap_err().to_string();
        assert!(e.contains("odd"), "{e}");
        assert!(crate::pipeline::Step::parse("binarize:sauvola,window=0").is_err());
        assert!(
            crate::pipeline::Step::parse("binarize:method=niblak")
                .unwrap_err()
                .to_string()
                .contains("expected")
        );
    }

    #[test]
    fn tiny_constant_and_nan_images() {
        let one = gray_codes(Plane::filled(1, 1, 0.5).unwrap());
        for step in ["binarize", "binarize:fixed,threshold=0.25", "binarize:sauvola,window=25"] {
            let out = run(step, one.clone());
            assert_eq!((out.width(), out.height()), (1, 1));
        }
        assert_eq!(run("binarize:fixed,threshold=0.25", one.clone()).planes()[0].get(0, 0), 1.0);
        // Constant: T is the value itself, nothing is above it.
        let flat = gray_codes(Plane::filled(6, 4, 0.3).unwrap());
        assert!(run("binarize", flat).planes()[0].as_slice().iter().all(|&v| v == 0.0));
        let nan = Raster::new(
            vec![Plane::from_vec(3, 1, vec![0.1, f32::NAN, 0.9]).unwrap()],
            Layout::Gray,
            Encoding::Srgb,
        )
        .unwrap();
        let out = run("binarize:fixed,threshold=0.5", nan.clone());
        assert_eq!(out.planes()[0].as_slice(), &[0.0, 0.0, 1.0]);
        let out = run("binarize:fixed,threshold=0.5,foreground=dark", nan);
        assert_eq!(out.planes()[0].as_slice(), &[1.0, 0.0, 0.0]);
    }

    #[test]
    fn colour_input_uses_luma_and_keeps_alpha() {
        // Pure green: BT.709 luma 0.7152 (ITU-R BT.709-6 §3.3) is above 0.7, pure red (0.2126) is not.
        let mk = |v: [f32; 4]| v.iter().map(|&c| Plane::filled(2, 1, c).unwrap()).collect::<Vec<_>>();
        let green = Raster::new(mk([0.0, 1.0, 0.0, 0.25]), Layout::Rgba, Encoding::Srgb).unwrap();
        let out = run("binarize:fixed,threshold=0.7", green);
        assert_eq!(out.layout(), Layout::GrayAlpha);
        assert_eq!(out.planes()[0].get(0, 0), 1.0);
        assert_eq!(out.planes()[1].get(1, 0), 0.25);
        let red = Raster::new(mk([1.0, 0.0, 0.0, 1.0]), Layout::Rgba, Encoding::Srgb).unwrap();
        assert_eq!(run("binarize:fixed,threshold=0.7", red).planes()[0].get(0, 0), 0.0);
    }

    #[test]
    fn serial_and_parallel_sauvola_are_identical() {
        let p = Plane::from_fn(300, 257, |x, y| ((x * 7 + y * 13) % 251) as f32 / 255.0).unwrap();
        let r = gray_codes(p);
        let serial = rayon::ThreadPoolBuilder::new().num_threads(1).build().unwrap();
        let a = serial.install(|| run("binarize:sauvola,window=25", r.clone()));
        let b = run("binarize:sauvola,window=25", r);
        assert_eq!(a.planes(), b.planes());
    }
}

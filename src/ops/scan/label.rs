//! Connected components of a binary mask (8-connected, run-based two-pass
//! labelling with union-find) and the area opening and closing of a gray plane (union-find
//! over pixels sorted by value). Library functions used by `dust`; they do not
//! decide what is foreground.

use rayon::prelude::*;

use crate::error::Error;
use crate::raster::Plane;

/// The connected components of a mask: `labels[y·width + x]` is 0 for
/// background and `1..=count` for the pixels of component k, numbered in the
/// raster order of each component's first pixel.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Labels {
    pub width: usize,
    pub height: usize,
    pub labels: Vec<u32>,
    pub count: usize,
}

impl Labels {
    /// The number of pixels of each label; index 0 counts the background.
    pub fn areas(&self) -> Vec<u64> {
        let mut areas = vec![0u64; self.count + 1];
        for &l in &self.labels {
            areas[l as usize] += 1;
        }
        areas
    }
}

/// The root of `i` in the union-find forest `parent`, halving the path on the way.
fn find(parent: &mut [u32], mut i: u32) -> u32 {
    while parent[i as usize] != i {
        let grand = parent[parent[i as usize] as usize];
        parent[i as usize] = grand;
        i = grand;
    }
    i
}

/// Joins the sets of `a` and `b` under the smaller root; returns that root.
fn union(parent: &mut [u32], a: u32, b: u32) -> u32 {
    let (ra, rb) = (find(parent, a), find(parent, b));
    let (lo, hi) = if ra < rb { (ra, rb) } else { (rb, ra) };
    parent[hi as usize] = lo;
    lo
}

/// A run of foreground pixels in one row: columns `start..end`.
#[derive(Clone, Copy, Debug)]
struct Run {
    start: u32,
    end: u32,
}

/// The runs of `true` in `row`, left to right, appended to `runs`.
fn row_runs(row: &[bool], runs: &mut Vec<Run>) {
    let mut x = 0;
    while x < row.len() {
        if !row[x] {
            x += 1;
            continue;
        }
        let start = x;
        while x < row.len() && row[x] {
            x += 1;
        }
        runs.push(Run { start: start as u32, end: x as u32 });
    }
}

/// Rows per band of the parallel passes (runs, and writing the labels).
const LABEL_BAND_ROWS: usize = 64;

/// Labels the 8-connected components of `mask` (`width × height`, row-major,
/// `true` = foreground).
///
/// ```text
/// runs:   each row's maximal runs of foreground, [start, end), in raster order
/// union:  a run of row y joins every run of row y − 1 it touches under
///         8-connectivity: start ≤ end′ and start′ ≤ end (one column of slack
///         each way gives the diagonal contact)
/// labels: each run's set gets a final label; every pixel of the run takes it
/// ```
///
/// The rows of runs are found, and the label image written, in parallel bands
/// of rows; only the union pass, over runs rather than pixels, is sequential
/// (a two-pointer walk along each pair of rows). Sets are joined under their
/// smallest run index, which is the run first met in raster order, so final
/// labels are numbered by each component's first pixel.
/// Sources: A. Rosenfeld and J. L. Pfaltz, "Sequential operations in digital
/// picture processing", J. ACM 13(4):471–494, 1966 (two passes with an
/// equivalence table); L. He, Y. Chao and K. Suzuki, "A run-based two-scan
/// labeling algorithm", IEEE Trans. Image Processing 17(5):749–756, 2008
/// (equivalences between runs instead of pixels), from memory.
pub fn label(mask: &[bool], width: usize, height: usize) -> Result<Labels, Error> {
    if mask.len() != width * height {
        return Err(Error::Internal(format!(
            "label: mask has {} samples, expected {width}×{height}",
            mask.len()
        )));
    }
    if width * height >= u32::MAX as usize {
        return Err(Error::Limit(format!("label: {width}×{height} is too many pixels to label")));
    }
    if width == 0 || height == 0 {
        return Ok(Labels { width, height, labels: Vec::new(), count: 0 });
    }
    // Runs per band of rows, found in parallel; row_start[y]..row_start[y + 1] are row y's.
    let bands: Vec<(Vec<Run>, Vec<u32>)> = mask
        .par_chunks(LABEL_BAND_ROWS * width)
        .map(|band| {
            let mut runs = Vec::new();
            let mut counts = Vec::with_capacity(LABEL_BAND_ROWS);
            for row in band.chunks_exact(width) {
                let before = runs.len();
                row_runs(row, &mut runs);
                counts.push((runs.len() - before) as u32);
            }
            (runs, counts)
        })
        .collect();
    let mut runs = Vec::with_capacity(bands.iter().map(|b| b.0.len()).sum());
    let mut row_start = Vec::with_capacity(height + 1);
    row_start.push(0usize);
    for (band_runs, counts) in bands {
        runs.extend_from_slice(&band_runs);
        for c in counts {
            row_start.push(row_start[row_start.len() - 1] + c as usize);
        }
    }
    if runs.len() >= u32::MAX as usize {
        return Err(Error::Limit(format!("label: {width}×{height} has too many runs to label")));
    }
    let mut parent: Vec<u32> = (0..runs.len() as u32).collect();
    for y in 1..height {
        let above = row_start[y - 1]..row_start[y];
        let mut q = above.start;
        for r in row_start[y]..row_start[y + 1] {
            let run = runs[r];
            // Runs above that end left of this run's slack cannot touch it or any later run.
            while q < above.end && runs[q].end < run.start {
                q += 1;
            }
            let mut k = q;
            while k < above.end && runs[k].start <= run.end {
                union(&mut parent, r as u32, k as u32);
                k += 1;
            }
        }
    }
    // Final labels: roots in increasing run order get 1, 2, …
    let mut final_label = vec![0u32; runs.len()];
    let mut count = 0u32;
    for i in 0..runs.len() {
        let r = find(&mut parent, i as u32) as usize;
        if r == i {
            count += 1;
            final_label[i] = count;
        } else {
            final_label[i] = final_label[r];
        }
    }
    let mut labels = vec![0u32; width * height];
    labels.par_chunks_mut(LABEL_BAND_ROWS * width).enumerate().for_each(|(b, band)| {
        for (i, row) in band.chunks_exact_mut(width).enumerate() {
            let y = b * LABEL_BAND_ROWS + i;
            for r in row_start[y]..row_start[y + 1] {
                let Run { start, end } = runs[r];
                row[start as usize..end as usize].fill(final_label[r]);
            }
        }
    });
    Ok(Labels { width, height, labels, count: count as usize })
}

/// Which structures an area filter removes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Structures {
    /// Bright ones (area opening): they sink to their surroundings.
    Bright,
    /// Dark ones (area closing): they rise to their surroundings.
    Dark,
}

/// The area opening (bright) or closing (dark) of `src` with area `min_area`
/// under 8-connectivity: every connected component of every threshold set
/// smaller than `min_area` pixels is flattened into its surroundings.
///
/// ```text
/// opening:  γ(f)(p) = max { t : p lies in a component of {f ≥ t} of area ≥ min_area }
/// closing:  φ(f)(p) = min { t : p lies in a component of {f ≤ t} of area ≥ min_area }
/// ```
///
/// Union-find over the pixels in order of value (brightest first for the
/// opening): each pixel joins its already visited neighbours; a neighbouring
/// set is absorbed when it is at the same value or still smaller than
/// `min_area`, otherwise the pixel's own set counts as large. A second pass in
/// the reverse order gives every pixel the value of the nearest set root
/// above it. Output samples are input samples, so the filter commutes with any
/// increasing change of values (it is right in any encoding). NaN samples are
/// never visited: they separate components and are kept. Sources:
/// L. Vincent, "Morphological area openings and closings for grey-scale images",
/// Proc. NATO Shape in Picture workshop, 1993 (definition); A. Meijster and
/// M. H. F. Wilkinson, "A comparison of algorithms for connected set openings
/// and closings", IEEE TPAMI 24(4):484–494, 2002 (the union-find algorithm).
pub fn area_filter(
    src: &Plane,
    min_area: usize,
    structures: Structures,
    levels: Option<u32>,
) -> Result<Plane, Error> {
    let (w, h) = (src.width(), src.height());
    let v = src.as_slice();
    if w * h >= u32::MAX as usize {
        return Err(Error::Limit(format!("area filter: {w}×{h} is too many pixels")));
    }
    let order = visiting_order(v, structures, levels);
    const UNSET: u32 = u32::MAX;
    let mut parent = vec![UNSET; w * h];
    let mut area = vec![0u32; w * h];
    let cap = u32::try_from(min_area).unwrap_or(u32::MAX);
    for &p in &order {
        parent[p as usize] = p;
        area[p as usize] = 1;
        let (x, y) = (p as usize % w, p as usize / w);
        for (dx, dy) in [(-1isize, -1isize), (0, -1), (1, -1), (-1, 0), (1, 0), (-1, 1), (0, 1), (1, 1)] {
            let (nx, ny) = (x as isize + dx, y as isize + dy);
            if nx < 0 || ny < 0 || nx >= w as isize || ny >= h as isize {
                continue;
            }
            let q = (ny as usize * w + nx as usize) as u32;
            if parent[q as usize] == UNSET {
                continue;
            }
            let r = find(&mut parent, q);
            if r == p {
                continue;
            }
            if v[r as usize] == v[p as usize] || area[r as usize] < cap {
                area[p as usize] = area[p as usize].saturating_add(area[r as usize]);
                parent[r as usize] = p;
            } else {
                area[p as usize] = cap;
            }
        }
    }
    let mut out = v.to_vec();
    // Parents are visited after their children, so the reverse order resolves them first.
    for &p in order.iter().rev() {
        let q = parent[p as usize];
        if q != p {
            out[p as usize] = out[q as usize];
        }
    }
    Plane::from_vec(w, h, out)
}

/// The indices of the non-NaN samples of `v`, brightest first for
/// [`Structures::Bright`] and darkest first for [`Structures::Dark`]; equal
/// values in index order. Exact codes (`levels`) are ordered by a counting sort.
fn visiting_order(v: &[f32], structures: Structures, levels: Option<u32>) -> Vec<u32> {
    let bright_first = structures == Structures::Bright;
    if let Some(n) = levels.filter(|&n| n <= 65535) {
        let code = |s: f32| (s * n as f32).round() as usize;
        let mut counts = vec![0usize; n as usize + 2];
        for &s in v.iter().filter(|s| !s.is_nan()) {
            let c = code(s).min(n as usize);
            let k = if bright_first { n as usize - c } else { c };
            counts[k + 1] += 1;
        }
        for k in 1..counts.len() {
            counts[k] += counts[k - 1];
        }
        let mut order = vec![0u32; counts[n as usize + 1]];
        for (i, &s) in v.iter().enumerate().filter(|(_, s)| !s.is_nan()) {
            let c = code(s).min(n as usize);
            let k = if bright_first { n as usize - c } else { c };
            order[counts[k]] = i as u32;
            counts[k] += 1;
        }
        return order;
    }
    let mut order: Vec<u32> = (0..v.len() as u32).filter(|&i| !v[i as usize].is_nan()).collect();
    if bright_first {
        order.sort_by(|&a, &b| v[b as usize].total_cmp(&v[a as usize]));
    } else {
        order.sort_by(|&a, &b| v[a as usize].total_cmp(&v[b as usize]));
    }
    order
}

#[cfg(test)]
mod tests {
    //! Edge cases: empty mask, 1×1, 1×N and N×1, diagonal-only contact (one
    //! component under 8-connectivity), U shapes whose arms meet late (union
    //! of two runs' sets), labels against a naive flood fill (also across the
    //! bands of the parallel passes), the area
    //! filter against a naive per-threshold definition, NaN as a separator,
    //! exact codes ordered like floats.
    use super::*;

    fn mask(rows: &[&str]) -> (Vec<bool>, usize, usize) {
        let w = rows[0].len();
        (rows.iter().flat_map(|r| r.chars().map(|c| c == '#')).collect(), w, rows.len())
    }

    /// Flood fill with an explicit stack: the definition of 8-connected components.
    fn naive_labels(m: &[bool], w: usize, h: usize) -> Vec<u32> {
        let mut out = vec![0u32; w * h];
        let mut next = 0;
        for start in 0..w * h {
            if !m[start] || out[start] != 0 {
                continue;
            }
            next += 1;
            let mut stack = vec![start];
            out[start] = next;
            while let Some(p) = stack.pop() {
                let (x, y) = ((p % w) as isize, (p / w) as isize);
                for dy in -1..=1 {
                    for dx in -1..=1 {
                        let (nx, ny) = (x + dx, y + dy);
                        if nx >= 0 && ny >= 0 && nx < w as isize && ny < h as isize {
                            let q = ny as usize * w + nx as usize;
                            if m[q] && out[q] == 0 {
                                out[q] = next;
                                stack.push(q);
                            }
                        }
                    }
                }
            }
        }
        out
    }

    fn noise_mask(w: usize, h: usize, seed: u32, density: u32) -> Vec<bool> {
        let mut s = seed;
        (0..w * h)
            .map(|_| {
                s = s.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
                (s >> 24) < density
            })
            .collect()
    }

    #[test]
    fn small_shapes() {
        let (m, w, h) = mask(&["#.#..", ".#...", "....#", "#..##"]);
        let l = label(&m, w, h).unwrap();
        // The X at the top left is one component (diagonal contact).
        assert_eq!(l.count, 3);
        assert_eq!(l.labels, vec![1, 0, 1, 0, 0, 0, 1, 0, 0, 0, 0, 0, 0, 0, 2, 3, 0, 0, 2, 2]);
        assert_eq!(l.areas(), vec![13, 3, 3, 1]);
        let (u, w, h) = mask(&["#.#.#", "#.#.#", "#####"]);
        assert_eq!(label(&u, w, h).unwrap().count, 1);
        assert_eq!(label(&[], 0, 0).unwrap().count, 0);
        assert_eq!(label(&[true], 1, 1).unwrap().labels, vec![1]);
        assert_eq!(label(&[true, false, true], 3, 1).unwrap().count, 2);
        assert_eq!(label(&[true, false, true], 1, 3).unwrap().count, 2);
        assert!(label(&[true], 2, 1).is_err());
    }

    #[test]
    fn labels_equal_a_flood_fill() {
        // 150 rows span three bands of the parallel passes.
        for (density, seed, h) in [(60u32, 1u32, 41), (110, 2, 150), (140, 3, 41), (200, 4, 150)] {
            let w = 67;
            let m = noise_mask(w, h, seed, density);
            let l = label(&m, w, h).unwrap();
            let want = naive_labels(&m, w, h);
            // Both number components by their first pixel in raster order.
            assert_eq!(l.labels, want, "density {density}");
            assert_eq!(l.count as u32, want.iter().copied().max().unwrap_or(0));
        }
    }

    /// The definition: for each threshold t, the components of {f ≥ t} of
    /// area ≥ a keep t as a lower bound for their pixels.
    fn naive_opening(p: &Plane, a: usize) -> Vec<f32> {
        let (w, h) = (p.width(), p.height());
        let mut values: Vec<f32> = p.as_slice().to_vec();
        values.sort_by(f32::total_cmp);
        values.dedup();
        let mut out = vec![values[0]; w * h];
        for &t in &values {
            let m: Vec<bool> = p.as_slice().iter().map(|&v| v >= t).collect();
            let l = label(&m, w, h).unwrap();
            let areas = l.areas();
            for i in 0..w * h {
                if l.labels[i] != 0 && areas[l.labels[i] as usize] >= a as u64 {
                    out[i] = out[i].max(t);
                }
            }
        }
        out
    }

    #[test]
    fn area_opening_and_closing_match_the_definition() {
        let mut s = 7u32;
        let p = Plane::from_fn(23, 19, |_, _| {
            s = s.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            ((s >> 29) as f32) / 7.0
        })
        .unwrap();
        for a in [1usize, 2, 5, 17, 60, 1000] {
            let got = area_filter(&p, a, Structures::Bright, None).unwrap();
            assert_eq!(got.as_slice(), naive_opening(&p, a).as_slice(), "opening, area {a}");
            // Closing is the opening of the negative.
            let neg = Plane::from_vec(23, 19, p.as_slice().iter().map(|v| 1.0 - v).collect()).unwrap();
            let closed = area_filter(&neg, a, Structures::Dark, None).unwrap();
            let want: Vec<f32> = naive_opening(&p, a).iter().map(|v| 1.0 - v).collect();
            assert_eq!(closed.as_slice(), want.as_slice(), "closing, area {a}");
            // Exact codes sorted by counting give the same result.
            let codes = area_filter(&p, a, Structures::Bright, Some(7)).unwrap();
            assert_eq!(codes, got);
        }
    }

    #[test]
    fn nan_separates_and_is_kept() {
        let p = Plane::from_vec(5, 1, vec![1.0, 1.0, f32::NAN, 1.0, 0.0]).unwrap();
        let out = area_filter(&p, 2, Structures::Bright, None).unwrap();
        assert_eq!(out.get(0, 0), 1.0);
        assert!(out.get(2, 0).is_nan());
        // The right 1 is alone (area 1 < 2) once NaN cuts it off: it sinks to 0.
        assert_eq!(out.get(3, 0), 0.0);
    }
}

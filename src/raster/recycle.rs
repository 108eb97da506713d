//! Reuse of large sample buffers while a step, or a batch worker, runs.
//!
//! A fresh allocation of a plane-sized buffer comes straight from the kernel,
//! and the first touch of each of its pages is a page fault that clears the
//! page: on a 12-Mpx plane that is about half of a simple filter's time
//! (measured on `box` radius 5 with `perf`), and a fifth of a batch of photos
//! (`perf` on `benches/batch.rs`). While a [`Scope`] is open on a thread —
//! `Raster::map_planes` opens one for a step when none is open, and each batch
//! worker holds one for its whole run — the large buffers freed on that thread
//! are kept here, already mapped, and later buffers take them: the next plane
//! of a step, or the same stage of the worker's next image.
//!
//! A request for `len` samples takes the smallest idle buffer whose capacity
//! is `len ..= 4 · len` (a smaller request than the buffer was made for uses
//! part of it). A miss (nothing idle fits) releases idle buffers of at least
//! `len` samples in all, oldest first, so the fresh buffer replaces them.
//!
//! Memory: the thread's held memory (in use plus idle) therefore grows only
//! when too little is idle, and then to what is in use — counted by capacity,
//! which a partly used buffer makes up to 4× its length. On the batch
//! benchmark's photos (decode, resize, sharpen, encode) a worker's held peak
//! is 6 % above its peak in use, and from the second image on nothing is
//! allocated fresh (worked through in `a_batch_worker_reaches_a_steady_state`).
//! All idle buffers are released when the outermost scope closes.

use std::cell::RefCell;

use rayon::prelude::*;

/// Buffers shorter than this (4 MiB of samples) go back to the allocator.
pub const MIN_SAMPLES: usize = 1 << 20;

/// A buffer serves requests down to this fraction of its capacity.
const SLACK: usize = 4;

/// The idle buffers, oldest first.
#[derive(Default)]
struct Idle(Vec<Vec<f32>>);

impl Idle {
    /// The idle buffer of least capacity in `len ..= SLACK · len`. When none
    /// fits, idle buffers holding at least `len` samples in all (or every idle
    /// buffer, if they hold fewer) are handed back to be released, oldest
    /// first, so the fresh buffer the caller allocates instead replaces them.
    fn take(&mut self, len: usize) -> Result<Vec<f32>, Vec<Vec<f32>>> {
        let fits = |b: &&Vec<f32>| (len..=len.saturating_mul(SLACK)).contains(&b.capacity());
        let best = self.0.iter().enumerate().filter(|(_, b)| fits(b)).min_by_key(|(_, b)| b.capacity());
        if let Some((best, _)) = best {
            return Ok(self.0.remove(best));
        }
        let mut held = 0;
        let count = self
            .0
            .iter()
            .take_while(|b| {
                let before = held;
                held += b.capacity();
                before < len
            })
            .count();
        Err(self.0.drain(..count).collect())
    }

    fn keep(&mut self, buf: Vec<f32>) {
        self.0.push(buf);
    }
}

thread_local! {
    /// The open scope's idle buffers on this thread (`None`: no scope open).
    static IDLE: RefCell<Option<Idle>> = const { RefCell::new(None) };
}

/// An idle buffer for `len` samples, with whatever it held, if one fits.
fn take(len: usize) -> Option<Vec<f32>> {
    if len < MIN_SAMPLES {
        return None;
    }
    match IDLE.with_borrow_mut(|idle| idle.as_mut().map(|idle| idle.take(len)))? {
        Ok(buf) => Some(buf),
        Err(released) => {
            drop(released);
            None
        }
    }
}

/// A buffer of `len` samples, every one `value`: a kept buffer when one fits
/// (refilled in parallel), else a new one.
pub fn filled(len: usize, value: f32) -> Vec<f32> {
    match take(len) {
        Some(mut buf) => {
            buf.truncate(len);
            buf.par_chunks_mut(1 << 16).for_each(|c| c.fill(value));
            buf.resize(len, value);
            buf
        }
        None => vec![value; len],
    }
}

/// A buffer of `len` samples for a caller that writes every one of them: a
/// kept buffer as it is (stale samples), else a new one of zeros (pages the
/// kernel maps on first touch, so no separate clearing pass either way).
pub fn for_overwrite(len: usize) -> Vec<f32> {
    match take(len) {
        Some(mut buf) => {
            buf.resize(len, 0.0);
            buf
        }
        None => vec![0.0; len],
    }
}

/// While a scope is open on a thread, the large buffers freed there are kept
/// for later ones; closing the outermost scope releases them. A scope opened
/// inside another shares the outer one's buffers.
pub struct Scope {
    outermost: bool,
}

impl Scope {
    pub fn open() -> Scope {
        let outermost = IDLE.with_borrow_mut(|idle| {
            let none = idle.is_none();
            if none {
                *idle = Some(Idle::default());
            }
            none
        });
        Scope { outermost }
    }
}

impl Drop for Scope {
    fn drop(&mut self) {
        if self.outermost {
            let mine = IDLE.with_borrow_mut(Option::take);
            drop(mine);
        }
    }
}

/// Keeps `buf` for a later buffer if it is large and a scope is open on this
/// thread; otherwise frees it.
pub fn give(buf: Vec<f32>) {
    if buf.capacity() < MIN_SAMPLES {
        return;
    }
    let unkept = IDLE.with_borrow_mut(|idle| match idle {
        Some(idle) => {
            idle.keep(buf);
            None
        }
        None => Some(buf),
    });
    drop(unkept);
}

#[cfg(test)]
mod tests {
    use super::*;

    fn capacities(v: &[Vec<f32>]) -> Vec<usize> {
        v.iter().map(Vec::capacity).collect()
    }

    #[test]
    fn the_least_fitting_is_taken_and_a_miss_releases_at_least_its_size() {
        let mut idle = Idle::default();
        for len in [1000, 1200, 4100, 3000] {
            idle.keep(Vec::with_capacity(len));
        }
        // 1000 ..= 4000 fit; the least of them first
        assert_eq!(idle.take(1000).unwrap().capacity(), 1000);
        assert_eq!(idle.take(1000).unwrap().capacity(), 1200);
        assert_eq!(idle.take(1000).unwrap().capacity(), 3000);
        // 4100 is more than 4 × 1000
        assert!(idle.take(1000).is_err(), "a miss");
        assert!(idle.0.is_empty(), "which released the 4100 (≥ 1000)");
        for len in [500, 600, 4000] {
            idle.keep(Vec::with_capacity(len));
        }
        // 5000 fits nothing: the oldest holding ≥ 5000 go (all three)
        assert_eq!(capacities(&idle.take(5000).unwrap_err()), [500, 600, 4000]);
        for len in [500, 600, 9000] {
            idle.keep(Vec::with_capacity(len));
        }
        // 1000 fits nothing (9000 > 4 × 1000): 500 + 600 go, the 9000 stays
        assert_eq!(capacities(&idle.take(1000).unwrap_err()), [500, 600]);
        assert_eq!(capacities(&idle.0), [9000]);
    }

    /// The sizes (in samples) one worker of `benches/batch.rs` asks for and
    /// frees per photo: a 3000×2000 JPEG's bytes and its three planes, a
    /// 1600×2000 intermediate and a 1600×1067 result per plane of the resize,
    /// then `sharpen`'s results, then the encoder frees the output.
    #[test]
    fn a_batch_worker_reaches_a_steady_state() {
        const M: usize = 100_000;
        let (bytes, plane, mid, out) = (45 * M, 60 * M, 32 * M, 17 * M);
        let mut idle = Idle::default();
        let mut fresh_per_image = Vec::new();
        for _ in 0..4 {
            let mut fresh = 0;
            let mut get = |len: usize, idle: &mut Idle| match idle.take(len) {
                Ok(b) => b,
                Err(_) => {
                    fresh += len;
                    Vec::with_capacity(len)
                }
            };
            let b = get(bytes, &mut idle);
            let planes = [0; 3].map(|_| get(plane, &mut idle));
            idle.keep(b);
            let mut outs = Vec::new();
            for p in planes {
                let m = get(mid, &mut idle);
                outs.push(get(out, &mut idle));
                idle.keep(m);
                idle.keep(p);
            }
            for o in std::mem::take(&mut outs) {
                outs.push(get(out, &mut idle));
                idle.keep(o);
            }
            outs.into_iter().for_each(|o| idle.keep(o));
            fresh_per_image.push(fresh);
        }
        assert_eq!(fresh_per_image[1..], [0, 0, 0], "after the first photo nothing is fresh");
        let held: usize = capacities(&idle.0).iter().sum();
        // Most in use at once: the bytes and three planes (22.5 M), or three
        // planes, one intermediate and one result (22.9 M).
        let in_use = (3 * plane + mid + out).max(bytes + 3 * plane);
        assert!(held <= in_use * 106 / 100, "held {held} vs {in_use} in use");
    }

    #[test]
    fn a_scope_reuses_freed_buffers_and_releases_them_when_closed() {
        let len = MIN_SAMPLES + 3;
        let scope = Scope::open();
        let buf = vec![7.0f32; len];
        let tag = buf.as_ptr() as usize;
        give(buf);
        give(vec![0.0; 10]); // short: never kept
        let again = filled(len - 2, 0.5);
        assert_eq!(again.as_ptr() as usize, tag, "the freed buffer is reused");
        assert!(again.len() == len - 2 && again.iter().all(|&v| v == 0.5), "and refilled");
        give(again);
        let inner = Scope::open();
        assert_eq!(IDLE.with_borrow(|i| i.as_ref().unwrap().0.len()), 1, "a nested scope shares the buffers");
        drop(inner);
        assert_eq!(IDLE.with_borrow(|i| i.as_ref().unwrap().0.len()), 1, "and closing it keeps them");
        let stale = for_overwrite(len);
        assert_eq!(stale.as_ptr() as usize, tag, "a buffer to overwrite is reused as it is");
        assert_eq!(stale.len(), len);
        give(stale);
        drop(scope);
        assert!(IDLE.with_borrow(|i| i.is_none()));
        give(vec![0.0; len]); // outside a scope: freed
        assert!(IDLE.with_borrow(|i| i.is_none()));
        assert_eq!(for_overwrite(5), [0.0; 5], "a new buffer to overwrite is zeros");
    }
}

//! Reuse of large sample buffers between the planes of one step.
//!
//! A fresh allocation of a plane-sized buffer comes straight from the kernel,
//! and the first touch of each of its pages is a page fault that clears the
//! page: on a 12-Mpx plane that is about half of a simple filter's time
//! (measured on `box` radius 5 with `perf`). While a step filters the planes
//! of a raster one after another ([`Scope`], opened by `Raster::map_planes`),
//! each dropped source plane's buffer is kept here, already mapped, and the
//! next result plane of about its size takes it. Only large buffers are kept,
//! at most [`KEEP`], per thread, and all are released when the scope closes, so no
//! memory stays held between steps or between the images of a batch.

use std::cell::RefCell;

use rayon::prelude::*;

/// Buffers shorter than this (4 MiB of samples) go back to the allocator.
pub const MIN_SAMPLES: usize = 1 << 20;

/// Most idle buffers kept at once; when full, the oldest is released.
pub const KEEP: usize = 2;

/// The idle buffers, oldest first.
#[derive(Default)]
struct Idle(Vec<Vec<f32>>);

impl Idle {
    /// The smallest idle buffer of `len ..= len + len / 4` samples. When none
    /// fits, the idle buffers are handed back to be released: the step has
    /// moved on to another size (a resize, say), and keeping them would only
    /// add to the peak memory.
    fn take(&mut self, len: usize) -> Result<Vec<f32>, Vec<Vec<f32>>> {
        let fits = |b: &&Vec<f32>| (len..=len + len / 4).contains(&b.len());
        match self.0.iter().enumerate().filter(|(_, b)| fits(b)).min_by_key(|(_, b)| b.len()) {
            Some((best, _)) => Ok(self.0.remove(best)),
            None => Err(std::mem::take(&mut self.0)),
        }
    }

    /// Keeps `buf`, handing back the oldest buffer when [`KEEP`] are idle.
    fn keep(&mut self, buf: Vec<f32>) -> Option<Vec<f32>> {
        let oldest = (self.0.len() >= KEEP).then(|| self.0.remove(0));
        self.0.push(buf);
        oldest
    }
}

thread_local! {
    /// The open scope's idle buffers on this thread (`None`: no scope open).
    static IDLE: RefCell<Option<Idle>> = const { RefCell::new(None) };
}

/// A buffer of `len` samples, every one `value`: a kept buffer when one of
/// `len ..= len + len / 4` samples is idle (filled in parallel), else a new one.
pub fn filled(len: usize, value: f32) -> Vec<f32> {
    if len >= MIN_SAMPLES {
        let taken = IDLE.with_borrow_mut(|idle| idle.as_mut().map(|idle| idle.take(len)));
        match taken {
            Some(Ok(mut buf)) => {
                buf.truncate(len);
                buf.par_chunks_mut(1 << 16).for_each(|c| c.fill(value));
                return buf;
            }
            Some(Err(stale)) => drop(stale),
            None => {}
        }
    }
    vec![value; len]
}

/// While one step filters the planes of a raster one after another, the
/// buffers freed on this thread are kept for its next planes; closing the
/// scope releases them (and restores the scope it was opened inside, if any).
pub struct Scope {
    outer: Option<Idle>,
}

impl Scope {
    pub fn open() -> Scope {
        Scope { outer: IDLE.with_borrow_mut(|idle| idle.replace(Idle::default())) }
    }
}

impl Drop for Scope {
    fn drop(&mut self) {
        let outer = self.outer.take();
        let mine = IDLE.with_borrow_mut(|idle| std::mem::replace(idle, outer));
        drop(mine);
    }
}

/// Keeps `buf` for a later plane if it is large and a scope is open on this
/// thread; otherwise frees it.
pub fn give(buf: Vec<f32>) {
    if buf.len() < MIN_SAMPLES {
        return;
    }
    let released = IDLE.with_borrow_mut(|idle| match idle {
        Some(idle) => idle.keep(buf),
        None => Some(buf),
    });
    drop(released);
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_best_fit_is_taken_and_a_miss_releases_everything() {
        let mut idle = Idle::default();
        assert!(idle.keep(vec![0.0; 1000]).is_none());
        assert!(idle.keep(vec![0.0; 1200]).is_none());
        // full: the oldest goes
        assert_eq!(idle.keep(vec![0.0; 1100]).map(|b| b.len()), Some(1000));
        // 1000 ..= 1250 fit; the smallest of them is taken
        assert_eq!(idle.take(1000).unwrap().len(), 1100);
        // 1201 ..= 1501 holds nothing idle (1200 is too short): all released
        assert_eq!(idle.take(1201).unwrap_err().iter().map(Vec::len).collect::<Vec<_>>(), [1200]);
        assert!(idle.0.is_empty());
        // a buffer more than 5/4 of the request is not handed out
        idle.keep(vec![0.0; 1300]);
        assert!(idle.take(1000).is_err());
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
        assert!(IDLE.with_borrow(|i| i.as_ref().unwrap().0.is_empty()), "a nested scope starts empty");
        drop(inner);
        assert_eq!(IDLE.with_borrow(|i| i.as_ref().unwrap().0.len()), 1, "and restores the outer one");
        drop(scope);
        assert!(IDLE.with_borrow(|i| i.is_none()));
        give(vec![0.0; len]); // outside a scope: freed
        assert!(IDLE.with_borrow(|i| i.is_none()));
    }
}

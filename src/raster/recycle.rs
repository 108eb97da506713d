//! Reuse of large sample buffers between planes.
//!
//! A fresh allocation of a plane-sized buffer comes straight from the kernel,
//! and the first touch of each of its pages is a page fault that clears the
//! page: on a 12-Mpx plane that is about half of a simple filter's time
//! (measured on `box` radius 5 with `perf`). A dropped plane's buffer is
//! therefore kept here, already mapped, and the next plane of about its size
//! takes it. Only large buffers are kept, and only a few, so the memory held
//! idle stays below the planes of one RGBA image.

use std::sync::Mutex;

use rayon::prelude::*;

/// Buffers shorter than this (4 MiB of samples) go back to the allocator.
pub const MIN_SAMPLES: usize = 1 << 20;

/// Most idle buffers kept at once (one RGBA image's planes); when full, the
/// oldest is released.
pub const KEEP: usize = 4;

static IDLE: Mutex<Vec<Vec<f32>>> = Mutex::new(Vec::new());

fn idle() -> std::sync::MutexGuard<'static, Vec<Vec<f32>>> {
    // A panic elsewhere while holding the lock leaves a list of whole buffers.
    IDLE.lock().unwrap_or_else(|poisoned| poisoned.into_inner())
}

/// A buffer of `len` samples, every one `value`: a kept buffer when one of
/// `len ..= len + len / 4` samples is idle (filled in parallel), else a new one.
pub fn filled(len: usize, value: f32) -> Vec<f32> {
    if len >= MIN_SAMPLES
        && let Some(mut buf) = take(len)
    {
        buf.truncate(len);
        buf.par_chunks_mut(1 << 16).for_each(|c| c.fill(value));
        return buf;
    }
    vec![value; len]
}

/// The smallest idle buffer of `len ..= len + len / 4` samples, if any.
fn take(len: usize) -> Option<Vec<f32>> {
    let mut idle = idle();
    let fits = |b: &Vec<f32>| (len..=len + len / 4).contains(&b.len());
    let best = idle.iter().enumerate().filter(|(_, b)| fits(b)).min_by_key(|(_, b)| b.len())?.0;
    Some(idle.remove(best))
}

/// Keeps `buf` for a later plane if it is large; otherwise frees it.
pub fn give(buf: Vec<f32>) {
    if buf.len() < MIN_SAMPLES {
        return;
    }
    let released = {
        let mut idle = idle();
        let oldest = (idle.len() >= KEEP).then(|| idle.remove(0));
        idle.push(buf);
        oldest
    };
    drop(released); // freed outside the lock
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kept_buffers_come_back_filled_and_only_when_they_fit() {
        // Other tests share the list, so look only at buffers tagged here:
        // a length no other test uses.
        let len = MIN_SAMPLES + 4321;
        let mut buf = vec![7.0f32; len];
        let tag = buf.as_ptr() as usize;
        buf[0] = 1.0;
        give(buf);
        // too small a request for this buffer: not handed out (len > 5/4 · small)
        let small = filled(MIN_SAMPLES / 2, 0.0);
        assert_ne!(small.as_ptr() as usize, tag);
        let again = filled(len - 1000, 0.5);
        assert_eq!(again.len(), len - 1000);
        assert!(again.iter().all(|&v| v == 0.5), "a kept buffer is refilled");
        // Short buffers are never kept.
        give(vec![0.0; 10]);
        assert!(idle().iter().all(|b| b.len() >= MIN_SAMPLES) && idle().len() <= KEEP);
    }
}

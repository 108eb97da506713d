//! Measurements of images: per-channel statistics and histograms
//! ([`stats`]), a wavelet noise estimate ([`noise`]), comparisons by PSNR and
//! SSIM ([`compare`]), metadata summaries ([`metadata`]) and pictures of them
//! ([`plot`], with its own bitmap [`font`]). Everything returns values; the
//! command line decides how to print them.

pub mod compare;
pub mod font;
pub mod metadata;
pub mod noise;
pub mod plot;
pub mod stats;

pub use compare::{CompareError, Comparison, compare, ssim};
pub use noise::noise_sigma;
pub use stats::{ChannelStats, channel_stats};

#[cfg(test)]
mod tests {
    use super::*;
    use crate::raster::{Encoding, Layout, Plane, Raster};

    #[test]
    fn results_do_not_depend_on_the_thread_count() {
        // 320 × 250 = 80 000 samples: more than one 65 536-sample chunk.
        let mut state = 99u64;
        let mut plane = || {
            Plane::from_fn(320, 250, |_, _| {
                state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                ((state >> 56) as f32) / 255.0
            })
            .unwrap()
        };
        let a = Raster::new(vec![plane(), plane(), plane()], Layout::Rgb, Encoding::Srgb).unwrap();
        let b = Raster::new(vec![plane(), plane(), plane()], Layout::Rgb, Encoding::Srgb).unwrap();
        let measure = || {
            let p = &a.planes()[0];
            (
                channel_stats(p, Some(255)),
                channel_stats(p, None),
                noise_sigma(p, Some(255)),
                compare(&a, &b, false).unwrap(),
                compare(&a, &b, true).unwrap(),
            )
        };
        let results: Vec<_> = [1, 2, 3]
            .iter()
            .map(|&n| rayon::ThreadPoolBuilder::new().num_threads(n).build().unwrap().install(measure))
            .collect();
        assert_eq!(results[0], results[1]);
        assert_eq!(results[0], results[2]);
    }
}

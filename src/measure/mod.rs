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

//! Border rules: which sample stands in for a position outside the data.

use std::fmt;
use std::str::FromStr;

/// How positions outside `0..n` are filled. With samples `a b c d` and the
/// border on the left (the same rules as scipy.ndimage's modes of the same
/// names, `nearest` being `replicate`):
///
/// ```text
/// reflect    d c b a | a b c d    edge sample repeated (default)
/// mirror       d c b | a b c d    edge sample not repeated
/// replicate    a a a | a b c d
/// wrap         b c d | a b c d
/// constant     k k k | a b c d
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Border {
    Reflect,
    Mirror,
    Replicate,
    Wrap,
    Constant(f32),
}

/// The rule names, in the order help text lists them.
pub const BORDER_NAMES: [&str; 5] = ["reflect", "mirror", "replicate", "wrap", "constant"];

impl Border {
    /// The index in `0..n` that position `i` reads, or `None` for a constant.
    /// Works for any `i`, however far outside (halos wider than the data repeat
    /// the rule periodically, as scipy.ndimage does).
    pub fn index(self, i: isize, n: usize) -> Option<usize> {
        let n_i = n as isize;
        if (0..n_i).contains(&i) {
            return Some(i as usize);
        }
        match self {
            Border::Constant(_) => None,
            Border::Replicate => Some(i.clamp(0, n_i - 1) as usize),
            Border::Wrap => Some(i.rem_euclid(n_i) as usize),
            Border::Reflect => {
                // Period 2n: a b c d d c b a.
                let m = i.rem_euclid(2 * n_i);
                Some(if m < n_i { m } else { 2 * n_i - 1 - m } as usize)
            }
            Border::Mirror => {
                if n == 1 {
                    return Some(0);
                }
                // Period 2n − 2: a b c d c b.
                let period = 2 * n_i - 2;
                let m = i.rem_euclid(period);
                Some(if m < n_i { m } else { period - m } as usize)
            }
        }
    }

    /// The fill value of `Constant`, zero for the others (never read for them).
    pub fn constant_value(self) -> f32 {
        match self {
            Border::Constant(v) => v,
            _ => 0.0,
        }
    }

    pub fn name(self) -> &'static str {
        match self {
            Border::Reflect => "reflect",
            Border::Mirror => "mirror",
            Border::Replicate => "replicate",
            Border::Wrap => "wrap",
            Border::Constant(_) => "constant",
        }
    }

    /// The rule called `name`; `constant` takes `fill` as its value.
    pub fn from_name(name: &str, fill: f32) -> Option<Border> {
        Some(match name {
            "reflect" => Border::Reflect,
            "mirror" => Border::Mirror,
            "replicate" => Border::Replicate,
            "wrap" => Border::Wrap,
            "constant" => Border::Constant(fill),
            _ => return None,
        })
    }
}

impl fmt::Display for Border {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for Border {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Border::from_name(s, 0.0)
            .ok_or_else(|| format!("unknown border `{s}`; expected one of {}", BORDER_NAMES.join(", ")))
    }
}

#[cfg(test)]
mod tests {
    //! Edge cases: n = 1, positions several periods away.
    use super::*;

    fn left_pad(b: Border, n: usize, k: isize) -> Vec<Option<usize>> {
        (-k..0).map(|i| b.index(i, n)).collect()
    }

    #[test]
    fn rules_match_the_reference_table() {
        // ../shared REFERENCES.md, "Border rules, spelled out": a b c d = 0 1 2 3.
        assert_eq!(left_pad(Border::Reflect, 4, 4), [3, 2, 1, 0].map(Some));
        assert_eq!(left_pad(Border::Mirror, 4, 3), [3, 2, 1].map(Some));
        assert_eq!(left_pad(Border::Replicate, 4, 3), [0, 0, 0].map(Some));
        assert_eq!(left_pad(Border::Wrap, 4, 3), [1, 2, 3].map(Some));
        assert_eq!(left_pad(Border::Constant(1.0), 4, 3), [None; 3]);
    }

    #[test]
    fn far_positions_and_single_samples() {
        for b in [Border::Reflect, Border::Mirror, Border::Replicate, Border::Wrap] {
            for i in -50..50 {
                assert_eq!(b.index(i, 1), Some(0), "{b:?} at {i}");
                assert!(b.index(i, 3).unwrap() < 3);
            }
        }
        // Reflect of 0 1 2 continues 2 1 0 0 1 2 2 1 0 …
        assert_eq!(
            (3..9).map(|i| Border::Reflect.index(i, 3).unwrap()).collect::<Vec<_>>(),
            [2, 1, 0, 0, 1, 2]
        );
        // Mirror of 0 1 2 continues 1 0 1 2 1 0 …
        assert_eq!(
            (3..9).map(|i| Border::Mirror.index(i, 3).unwrap()).collect::<Vec<_>>(),
            [1, 0, 1, 2, 1, 0]
        );
    }

    #[test]
    fn names_round_trip_and_errors_list_choices() {
        for name in BORDER_NAMES {
            assert_eq!(name.parse::<Border>().unwrap().name(), name);
        }
        let err = "mirrror".parse::<Border>().unwrap_err();
        assert!(err.contains("reflect, mirror, replicate, wrap, constant"), "{err}");
    }
}

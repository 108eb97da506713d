//! "Did you mean …?": the closest known word to a misspelt one.

/// The candidate closest to `word` by optimal-string-alignment distance (an adjacent swap counts as one edit), if it is close
/// enough to be a plausible typo (at most a third of the word's length, at least 1).
pub fn nearest<'a>(word: &str, candidates: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
    let limit = (word.chars().count() / 3).max(1);
    candidates
        .into_iter()
        .map(|c| (strsim::osa_distance(word, c), c))
        .filter(|(d, _)| *d <= limit)
        .min_by_key(|(d, _)| *d)
        .map(|(_, c)| c)
}

#[cfg(test)]
mod tests {
    use super::nearest;

    #[test]
    fn finds_close_words_only() {
        assert_eq!(nearest("guass", ["gauss", "gray", "gamma"]), Some("gauss"));
        assert_eq!(nearest("sigmaa", ["sigma", "truncate"]), Some("sigma"));
        assert_eq!(nearest("xyzzy", ["gauss", "gray"]), None);
    }
}

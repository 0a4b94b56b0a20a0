//! The caution every advising output carries (plans, statics, cage health,
//! reports). One text, so every place says the same thing.

/// The caution, as lines short enough for a phone photo of a terminal.
pub const CAUTION_LINES: [&str; 3] = [
    "CAUTION: estimates from a model of this cage and profile, not guarantees.",
    "Inspect the cage physically; keep clear of the propellers and disarm to touch.",
    "Follow local aviation rules, the maker's manual and a qualified engineer.",
];

/// The caution as one paragraph (reports, JSON).
pub fn caution_text() -> String {
    CAUTION_LINES.join(" ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_caution_names_the_four_points() {
        let t = caution_text().to_lowercase();
        for must in [
            "not guarantees",
            "inspect",
            "propellers",
            "aviation rules",
            "engineer",
        ] {
            assert!(t.contains(must), "{must}");
        }
        assert!(CAUTION_LINES.iter().all(|l| l.len() < 80));
    }
}

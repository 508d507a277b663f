//! The five standing cautions that travel with every result that could steer money.
//!
//! They are defined once here so the web pages, the JSON documents and the brief cannot
//! drift apart. Each caution has a stable id, a short heading and one plain sentence.

use serde::{Deserialize, Serialize};

/// One standing caution.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Caution {
    /// A stable identifier, e.g. `association`.
    pub id: String,
    /// A short heading.
    pub heading: String,
    /// One plain sentence.
    pub text: String,
}

const CAUTIONS: [(&str, &str, &str); 5] = [
    (
        "association",
        "Associations, not causes",
        "These results describe how the outcome and the indicators move together across areas; they do not show that changing an indicator would change the outcome.",
    ),
    (
        "areas-not-individuals",
        "Areas, not individuals",
        "Area results do not describe any individual resident: a pattern across districts need not hold for the people living in them.",
    ),
    (
        "small-populations",
        "Small populations give unstable rates",
        "Rates for districts with few residents swing widely from year to year on a handful of incidents; treat their values and residuals with extra care.",
    ),
    (
        "enforcement-feedback",
        "Enforcement-derived counts can feed back on themselves",
        "Counts that come from enforcement activity partly measure where enforcement already looks, so directing more attention by them can inflate the same counts.",
    ),
    (
        "local-review",
        "Decisions rest with local review",
        "Any allocation decision rests with local policy, legal and equity review, not with this model.",
    ),
];

/// The five standing cautions, in their fixed order.
pub fn standing_cautions() -> Vec<Caution> {
    CAUTIONS
        .iter()
        .map(|(id, heading, text)| Caution {
            id: (*id).into(),
            heading: (*heading).into(),
            text: (*text).into(),
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn all_five_are_present_in_order() {
        let ids: Vec<String> = standing_cautions().into_iter().map(|c| c.id).collect();
        assert_eq!(
            ids,
            [
                "association",
                "areas-not-individuals",
                "small-populations",
                "enforcement-feedback",
                "local-review"
            ]
        );
    }
}

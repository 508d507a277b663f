//! Integration tests of wardcast-report, gathered in one test binary.
//!
//! Charts are checked two ways: structural assertions that hold for every
//! chart (well-formed XML, a title and a text alternative, a viewBox, no text
//! under 14 px, no non-finite numbers, no style or script), and insta
//! snapshots that pin the exact output. Set WARDCAST_CHART_DIR to a folder to
//! also write every rendered chart there for viewing.

mod report {
    pub mod support;

    mod brief;
    mod charts;
    mod invalid;
    mod safety;
    mod survey_charts;
}

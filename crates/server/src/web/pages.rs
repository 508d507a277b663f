//! The page shell: the layout every page shares (navigation, sharing warning, cautions) and
//! the one render wrapper that turns a template error into a 500 page.

use askama::Template;
use axum::http::{HeaderValue, header};
use axum::response::{IntoResponse, Response};
use wardcast_contract::cautions::{Caution, standing_cautions};

use crate::error::ServerError;

/// The sections of an analysis, in the order the analyst usually walks them.
///
/// Each entry: the section, the navigation label, the path segment under `/analyses/{id}`
/// (empty for the analysis' main page) and a one-line hint.
const SECTIONS: [(Section, &str, &str, &str); 8] = [
    (Section::Data, "Data", "data", "The table behind the model, and the model's set-up"),
    (Section::Survey, "Survey", "survey", "Each column's spread, and how the columns move together"),
    (Section::Effects, "Effects", "", "What the model says, with intervals"),
    (Section::Soundness, "Soundness", "soundness", "Whether the model's assumptions hold"),
    (Section::Contenders, "Contenders", "contenders", "Candidate models side by side"),
    (Section::Areas, "Areas", "areas", "Observed against expected, area by area"),
    (Section::WhatIf, "What if", "what-if", "Predicted outcomes for changed indicators, and allocation"),
    (Section::Brief, "Brief", "brief", "The exportable summary"),
];

/// The section a page belongs to, for highlighting the navigation.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Section {
    /// The start page and the table pages, outside any analysis.
    Start,
    /// The table behind an analysis and its model set-up.
    Data,
    /// Column summaries, scatter matrix and correlations.
    Survey,
    /// The effects page of an analysis.
    Effects,
    /// Diagnostics.
    Soundness,
    /// Model comparison: subsets, cross-validation, nested tests.
    Contenders,
    /// Observed against expected per area.
    Areas,
    /// Scenarios and allocation.
    WhatIf,
    /// The brief.
    Brief,
}

/// The address of a section of an analysis.
pub fn section_href(id: &str, section: Section) -> String {
    SECTIONS
        .iter()
        .find(|(s, ..)| *s == section)
        .map(
            |&(_, _, path, _)| {
                if path.is_empty() { format!("/analyses/{id}") } else { format!("/analyses/{id}/{path}") }
            },
        )
        .unwrap_or_else(|| "/".to_owned())
}

/// One navigation entry. Sections that do not exist yet are shown without a link.
#[derive(Debug, Clone)]
pub struct NavItem {
    /// The label.
    pub label: &'static str,
    /// Where it leads, or `None` while the section is not available.
    pub href: Option<String>,
    /// A one-line hint (the link's title).
    pub hint: &'static str,
    /// Whether this is the current page.
    pub current: bool,
}

/// What every page's frame needs.
#[derive(Debug, Clone)]
pub struct Layout {
    /// The page title (without the product name).
    pub title: String,
    /// Whether the server is shared on the local network; shows the plain-HTTP warning.
    pub shared: bool,
    /// The analysis this page belongs to, for the header.
    pub analysis_name: Option<String>,
    /// The navigation, empty outside an analysis.
    pub nav: Vec<NavItem>,
    /// The standing cautions, shown on every page that could steer an allocation.
    pub cautions: Vec<Caution>,
    /// Whether the page is seen through the read-only audience link: forms that post are
    /// hidden and a banner says so.
    pub read_only: bool,
}

impl Layout {
    /// The frame for a page outside any analysis (no cautions, no section navigation).
    pub fn plain(title: impl Into<String>, shared: bool) -> Self {
        Layout {
            title: title.into(),
            shared,
            analysis_name: None,
            nav: Vec::new(),
            cautions: Vec::new(),
            read_only: crate::security::read_only(),
        }
    }

    /// The frame for a page of an analysis: section navigation and the cautions panel.
    pub fn analysis(title: impl Into<String>, shared: bool, id: &str, name: &str, section: Section) -> Self {
        let nav = SECTIONS
            .iter()
            .map(|&(s, label, _, hint)| NavItem {
                label,
                href: Some(section_href(id, s)),
                hint,
                current: section == s,
            })
            .collect();
        Layout {
            title: title.into(),
            shared,
            analysis_name: Some(name.to_owned()),
            nav,
            cautions: standing_cautions(),
            read_only: crate::security::read_only(),
        }
    }
}

/// Renders a page to text; a template failure is a render error.
pub fn render_string<T: Template>(page: &T) -> Result<String, ServerError> {
    page.render().map_err(ServerError::Render)
}

/// An HTML response from text rendered earlier (e.g. from [`Analysis::cached_page`]).
///
/// [`Analysis::cached_page`]: super::state::Analysis::cached_page
pub fn html(text: &str) -> Response {
    let mut response = text.to_owned().into_response();
    response.headers_mut().insert(header::CONTENT_TYPE, HeaderValue::from_static("text/html; charset=utf-8"));
    response
}

/// The cache key of a page of an analysis: its name plus every frame flag it depends on.
pub fn page_key(name: &str, layout_shared: bool) -> String {
    format!("{name}|shared={layout_shared}|read_only={}", crate::security::read_only())
}

/// Renders a page; a template failure becomes the generic 500 page (details go to the log).
pub fn render<T: Template>(page: &T) -> Response {
    match page.render() {
        Ok(html) => {
            let mut response = html.into_response();
            response
                .headers_mut()
                .insert(header::CONTENT_TYPE, HeaderValue::from_static("text/html; charset=utf-8"));
            response
        }
        Err(e) => ServerError::Render(e).into_response(),
    }
}

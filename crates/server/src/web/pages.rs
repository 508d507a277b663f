//! The page shell: the layout every page shares (navigation, sharing warning, cautions) and
//! the one render wrapper that turns a template error into a 500 page.

use askama::Template;
use axum::http::{HeaderValue, header};
use axum::response::{IntoResponse, Response};
use wardcast_contract::cautions::{Caution, standing_cautions};

use crate::error::ServerError;

/// The sections of an analysis, in the order the analyst usually walks them.
///
/// Each entry: the navigation label, the path segment under `/analyses/{id}` (empty for the
/// analysis' main page), a one-line hint, and whether the section exists yet.
const SECTIONS: [(&str, &str, &str, bool); 8] = [
    ("Data", "data", "Upload, check and join tables", false),
    ("Survey", "survey", "Each column's spread, and how the columns move together", false),
    ("Effects", "", "What the model says, with intervals", true),
    ("Soundness", "soundness", "Whether the model's assumptions hold", false),
    ("Contenders", "contenders", "Candidate models side by side", false),
    ("Areas", "areas", "Observed against expected, area by area", false),
    ("What if", "what-if", "Predicted outcomes for changed indicators", false),
    ("Brief", "brief", "The exportable summary", false),
];

/// The section a page belongs to, for highlighting the navigation.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Section {
    /// The start page, outside any analysis.
    Start,
    /// The effects page of an analysis.
    Effects,
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
}

impl Layout {
    /// The frame for a page outside any analysis (no cautions, no section navigation).
    pub fn plain(title: impl Into<String>, shared: bool) -> Self {
        Layout { title: title.into(), shared, analysis_name: None, nav: Vec::new(), cautions: Vec::new() }
    }

    /// The frame for a page of an analysis: section navigation and the cautions panel.
    pub fn analysis(title: impl Into<String>, shared: bool, id: &str, name: &str, section: Section) -> Self {
        let nav = SECTIONS
            .iter()
            .map(|&(label, path, hint, available)| {
                let href = available.then(|| {
                    if path.is_empty() { format!("/analyses/{id}") } else { format!("/analyses/{id}/{path}") }
                });
                NavItem { label, href, hint, current: section == Section::Effects && label == "Effects" }
            })
            .collect();
        Layout {
            title: title.into(),
            shared,
            analysis_name: Some(name.to_owned()),
            nav,
            cautions: standing_cautions(),
        }
    }
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

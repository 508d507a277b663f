//! The brief's view of an allocation scenario, made from the engine's allocation document.
//!
//! [`AllocationView::from_document`] copies what the brief shows from an
//! [`AllocationDocument`]: the shares under every basis side by side, the proposed amounts
//! (whole units that sum exactly to the total), this year's budget, the simulated share ranges
//! and the notes that qualify them. Nothing is recomputed here, so every amount in the brief is
//! the engine's.

use wardcast_contract::allocation::AllocationDocument;

use super::text::{fmt_amount, fmt_fixed};
use super::{AllocationRow, AllocationView};

/// The words for each pure basis, in the order the shares are listed.
const BASIS_WORDS: [&str; 3] = ["population", "observed incidents", "model-expected incidents"];

fn basis_words(name: &str) -> &str {
    match name {
        "population" => BASIS_WORDS[0],
        "observed" => BASIS_WORDS[1],
        "expected" => BASIS_WORDS[2],
        other => other,
    }
}

fn percent(w: f64) -> String {
    format!("{}%", fmt_fixed(100.0 * w, 0))
}

impl AllocationView {
    /// The brief's view of an allocation document, with amounts in `currency` (e.g. "marks").
    ///
    /// The share range of a district is the simulated 2.5th to 97.5th percentile of its share
    /// of the total under the chosen basis. When the chosen basis does not use the model
    /// (population or observed incidents), its amounts carry no model uncertainty, so no range
    /// is given and a note says so.
    pub fn from_document(doc: &AllocationDocument, currency: &str) -> Self {
        let s = &doc.settings;
        let blend = s.blend_weights;
        let mut bases: Vec<String> = BASIS_WORDS.iter().map(|b| (*b).to_owned()).collect();
        if blend.is_some() {
            bases.push("blend".to_owned());
        }
        let chosen_basis = match blend {
            Some(w) => format!(
                "a blend of population ({}), observed incidents ({}) and model-expected incidents ({})",
                percent(w.population),
                percent(w.observed),
                percent(w.expected)
            ),
            None => basis_words(&s.basis).to_owned(),
        };
        let uses_model = match blend {
            Some(w) => w.expected > 0.0,
            None => s.basis == "expected",
        };
        let rows = doc
            .districts
            .iter()
            .map(|d| {
                let mut shares = vec![d.shares.population, d.shares.observed, d.shares.expected];
                if blend.is_some() {
                    shares.push(d.shares.blend.unwrap_or(f64::NAN));
                }
                let range = uses_model
                    .then(|| doc.uncertainty.districts.iter().find(|r| r.key == d.key))
                    .flatten()
                    .map(|r| r.share);
                AllocationRow {
                    key: d.key.clone(),
                    current_budget: d.current_budget.map(|b| b as f64),
                    shares,
                    amount: d.proposed as f64,
                    share_low: range.map(|r| r.p2_5),
                    share_high: range.map(|r| r.p97_5),
                }
            })
            .collect();
        let mut notes = vec![doc.framing.clone()];
        if !uses_model {
            notes.push(format!(
                "The chosen basis does not use the model, so its amounts carry no model uncertainty; the simulated ranges below are left empty. On the model-expected basis the widest simulated 95% range of a district's share is {} percentage points.",
                fmt_fixed(doc.uncertainty.max_share_width_pp, 2)
            ));
        }
        for c in &doc.sensitivity.comparisons {
            notes.push(format!(
                "Switching between {} and {} moves {} {currency} between districts; the largest share difference is {} percentage points ({}).",
                basis_words(&c.first),
                basis_words(&c.second),
                fmt_amount(c.amount_moved as f64),
                fmt_fixed(c.max_abs_pp, 2),
                c.max_key
            ));
        }
        notes.extend(doc.notes.iter().cloned());
        AllocationView {
            total: s.total as f64,
            currency: currency.to_owned(),
            bases,
            chosen_basis,
            floor: s.floor.map(|f| f as f64),
            cap: s.cap.map(|c| c as f64),
            seed: Some(s.seed),
            draws: Some(s.draws),
            rows,
            notes,
        }
    }
}

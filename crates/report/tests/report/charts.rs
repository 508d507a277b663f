//! Snapshot cases: one or more charts of every kind, drawn from small fixed data sets.

use super::support::{check, element_text, normal_quantile};
use wardcast_report::svg::{
    Axis, BarChart, BarGroup, Bins, Callout, CorrelationHeatMap, EffectPlot, EffectRow, Histogram, LinePlot,
    LineSeries, Marker, PointLabels, QqLine, QqPlot, QqPoint, Reference, Scatter, ScatterPoint, Threshold,
    XTicks,
};

/// One demo district: code, name, residents, assaults and vacancy (None when the cell is empty).
struct DemoRow {
    code: String,
    name: String,
    rate: f64,
    vacancy: Option<f64>,
}

/// Reads the committed Larkmoor demo table (invented data) for a realistic scatter plot.
fn demo_rows() -> Vec<DemoRow> {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/../../demo/larkmoor_districts.csv");
    let text = std::fs::read_to_string(path).expect("the demo table is committed");
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().expect("a header").split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).expect("a demo column");
    let (code, name, residents, assaults, vacancy) =
        (col("district_code"), col("district_name"), col("residents"), col("assaults"), col("vacancy_pct"));
    lines
        .map(|line| {
            let f: Vec<&str> = line.split(',').collect();
            let residents: f64 = f[residents].parse().expect("residents");
            let assaults: f64 = f[assaults].parse().expect("assaults");
            DemoRow {
                code: f[code].to_owned(),
                name: f[name].to_owned(),
                rate: assaults / residents * 10_000.0,
                vacancy: f[vacancy].parse().ok(),
            }
        })
        .collect()
}

#[test]
fn scatter_of_the_demo_rate_against_vacancy_with_a_log_curve() {
    let rows = demo_rows();
    // A one-predictor least-squares fit of the rate on ln(vacancy), without the arena quarter.
    let fit_rows: Vec<(f64, f64)> = rows
        .iter()
        .filter(|r| r.code != "LK-47")
        .filter_map(|r| r.vacancy.map(|v| (v.ln(), r.rate)))
        .collect();
    let n = fit_rows.len() as f64;
    let mx = fit_rows.iter().map(|p| p.0).sum::<f64>() / n;
    let my = fit_rows.iter().map(|p| p.1).sum::<f64>() / n;
    let sxy: f64 = fit_rows.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let sxx: f64 = fit_rows.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let slope = sxy / sxx;
    let intercept = my - slope * mx;
    let curve = (0..=40)
        .map(|k| {
            let v = 1.0 + 32.0 * f64::from(k) / 40.0;
            (v, intercept + slope * v.ln())
        })
        .collect();
    let chart = Scatter {
        title: "Assault rate and housing vacancy".into(),
        x_axis: Axis::new("Vacant dwellings", "% of dwellings"),
        y_axis: Axis::new("Assault incidents", "per 10,000 residents"),
        items: "districts".into(),
        points: rows
            .iter()
            .map(|r| {
                let p = ScatterPoint::new(r.vacancy.unwrap_or(f64::NAN), r.rate)
                    .labelled(format!("{} {}", r.code, r.name));
                if r.code == "LK-47" { p.flagged() } else { p }
            })
            .collect(),
        references: vec![Reference::Curve {
            points: curve,
            label: "Fitted on ln(vacancy), arena quarter left out".into(),
        }],
        labels: PointLabels::Flagged,
        flagged_meaning: "Few residents, many visitors".into(),
        summary: String::new(),
    };
    let svg = check("scatter_demo_vacancy", &chart);
    let desc = element_text(&svg, "desc").expect("a desc");
    assert!(desc.contains("LK-47 Harbour Arena Quarter"), "{desc}");
    assert!(desc.contains("1 district not shown"), "the empty vacancy cell is reported: {desc}");
}

#[test]
fn scatter_of_residuals_with_a_zero_line_and_labels() {
    let fitted = [22.0, 31.5, 38.2, 45.0, 51.3, 58.8, 64.1, 70.6, 77.9, 85.4];
    let resid = [-4.1, 2.2, 6.8, -1.5, 0.4, -9.6, 3.3, 18.7, -2.9, 1.1];
    let mut points: Vec<ScatterPoint> = fitted
        .iter()
        .zip(resid)
        .enumerate()
        .map(|(i, (&f, r))| ScatterPoint::new(f, r).labelled(format!("LK-{:02}", i + 1)))
        .collect();
    points[7] = points[7].clone().flagged();
    points.push(ScatterPoint::new(f64::INFINITY, 1.0).labelled("LK-11"));
    let chart = Scatter {
        title: "Residuals against predicted rate".into(),
        x_axis: Axis::new("Predicted rate", "incidents per 10,000 residents"),
        y_axis: Axis::new("Residual", "incidents per 10,000 residents"),
        items: "districts".into(),
        points,
        references: vec![Reference::Horizontal { y: 0.0, label: "Residual of zero".into() }],
        labels: PointLabels::All,
        flagged_meaning: "Outside its 95% prediction interval".into(),
        summary: "The spread looks even across predicted rates.".into(),
    };
    let svg = check("scatter_residuals", &chart);
    let desc = element_text(&svg, "desc").expect("a desc");
    assert!(desc.starts_with("Scatter plot of Residual"), "{desc}");
    assert!(desc.contains("LK-08 (Predicted rate 70.60, Residual 18.70)"), "{desc}");
}

#[test]
fn effect_plot_of_coefficients_with_intervals() {
    let chart = EffectPlot {
        title: "Associations with the assault rate".into(),
        axis: Axis::new("Difference in rate per unit of the indicator", "per 10,000 residents"),
        rows: vec![
            EffectRow { label: "Unemployment (per point)".into(), estimate: 4.67, low: 2.10, high: 7.24 },
            EffectRow { label: "ln(vacancy)".into(), estimate: 15.0, low: 10.4, high: 19.6 },
            EffectRow { label: "Youth share (per point)".into(), estimate: 0.97, low: -0.55, high: 2.49 },
            EffectRow { label: "After-school seats (per 10)".into(), estimate: -4.0, low: -6.9, high: -1.1 },
            EffectRow { label: "Streetlight outages".into(), estimate: 5.2, low: f64::NAN, high: f64::NAN },
        ],
        interval_name: "95% confidence interval".into(),
        reference: Some(0.0),
        reference_label: "No association".into(),
        decimals: Some(2),
        summary: String::new(),
    };
    let svg = check("effect_coefficients", &chart);
    let desc = element_text(&svg, "desc").expect("a desc");
    assert!(desc.contains("Unemployment (per point): 4.67 (2.10 to 7.24)."), "{desc}");
    assert!(desc.contains("Streetlight outages: 5.20 (no interval)."), "{desc}");
    assert!(desc.contains("1 interval includes it."), "{desc}");
}

#[test]
fn line_plot_of_a_criterion_against_model_size() {
    let chart = LinePlot {
        title: "Mallows' Cp by number of predictors".into(),
        x_axis: Axis::new("Predictors in the model", ""),
        y_axis: Axis::new("Mallows' Cp", ""),
        series: vec![LineSeries {
            name: "Best subset of each size".into(),
            points: vec![
                (1.0, 96.4),
                (2.0, 41.7),
                (3.0, 12.9),
                (4.0, 4.6),
                (5.0, 5.3),
                (6.0, 6.8),
                (7.0, 8.0),
            ],
        }],
        x_ticks: XTicks::Integers,
        callouts: vec![Callout { x: 4.0, y: 4.6, label: "Smallest Cp".into() }],
        summary: String::new(),
    };
    let svg = check("line_cp", &chart);
    let desc = element_text(&svg, "desc").expect("a desc");
    assert!(desc.contains("lowest 4.600 at Predictors in the model 4"), "{desc}");
}

#[test]
fn line_plot_with_two_series_and_a_gap() {
    let chart = LinePlot {
        title: "Cross-validated error by model size".into(),
        x_axis: Axis::new("Predictors in the model", ""),
        y_axis: Axis::new("Root mean squared error", "per 10,000 residents"),
        series: vec![
            LineSeries {
                name: "Random folds".into(),
                points: vec![(1.0, 19.2), (2.0, 14.1), (3.0, 11.0), (4.0, 9.6), (5.0, 9.9)],
            },
            LineSeries {
                name: "Grouped by borough".into(),
                points: vec![(1.0, 20.5), (2.0, 15.9), (3.0, f64::NAN), (4.0, 11.8), (5.0, 12.6)],
            },
        ],
        x_ticks: XTicks::Integers,
        callouts: Vec::new(),
        summary: String::new(),
    };
    let svg = check("line_cv_two_series", &chart);
    assert_eq!(svg.matches("<polyline").count(), 3, "the gap splits the second line in two");
}

#[test]
fn histogram_of_residuals_with_a_marker() {
    let values = vec![
        -14.2,
        -9.8,
        -7.5,
        -6.1,
        -4.9,
        -3.3,
        -2.8,
        -1.9,
        -1.2,
        -0.4,
        0.3,
        0.9,
        1.4,
        2.2,
        2.9,
        3.8,
        4.4,
        5.6,
        7.3,
        9.9,
        12.5,
        19.4,
        f64::NAN,
    ];
    let chart = Histogram {
        title: "Distribution of residuals".into(),
        axis: Axis::new("Residual", "incidents per 10,000 residents"),
        items: "districts".into(),
        values,
        bins: Bins::Auto,
        markers: vec![Marker { x: 0.0, label: "Zero".into() }],
        summary: String::new(),
    };
    let svg = check("histogram_residuals", &chart);
    let desc = element_text(&svg, "desc").expect("a desc");
    assert!(
        desc.contains("Histogram of Residual (incidents per 10,000 residents) for 22 districts."),
        "{desc}"
    );
    assert!(desc.contains("1 district not counted"), "{desc}");
}

#[test]
fn histogram_with_a_fixed_bin_width() {
    let chart = Histogram {
        title: "Residents per district".into(),
        axis: Axis::new("Residents", "persons"),
        items: "districts".into(),
        values: vec![
            3230.0, 4350.0, 5110.0, 7000.0, 9580.0, 12_400.0, 13_460.0, 15_950.0, 16_240.0, 22_990.0,
        ],
        bins: Bins::Width(2500.0),
        markers: Vec::new(),
        summary: String::new(),
    };
    let svg = check("histogram_width", &chart);
    let desc = element_text(&svg, "desc").expect("a desc");
    assert!(desc.contains("9 bins of width 2500 from 2500 to 25,000"), "{desc}");
}

#[test]
fn qq_plot_of_studentized_residuals() {
    let sample = [
        -2.31, -1.62, -1.20, -0.95, -0.71, -0.52, -0.33, -0.14, 0.02, 0.19, 0.37, 0.55, 0.78, 1.02, 1.31,
        1.74, 3.86,
    ];
    let n = sample.len() as f64;
    let points = sample
        .iter()
        .enumerate()
        .map(|(i, &s)| {
            // Blom's plotting positions (i - 3/8) / (n + 1/4), Blom 1958.
            let p = (i as f64 + 1.0 - 0.375) / (n + 0.25);
            QqPoint {
                theoretical: normal_quantile(p),
                sample: s,
                label: (s > 3.0).then(|| "LK-47 Harbour Arena Quarter".to_owned()),
                emphasis: if s > 3.0 { wardcast_report::svg::Emphasis::Flagged } else { Default::default() },
            }
        })
        .collect();
    let chart = QqPlot {
        title: "Residuals against a normal distribution".into(),
        x_axis: Axis::new("Standard normal quantile", ""),
        y_axis: Axis::new("Studentized deleted residual", ""),
        items: "districts".into(),
        points,
        line: QqLine::Quartiles,
        labels: PointLabels::Flagged,
        flagged_meaning: "Largest departure".into(),
        summary: String::new(),
    };
    let svg = check("qq_residuals", &chart);
    let desc = element_text(&svg, "desc").expect("a desc");
    assert!(desc.contains("furthest from the line is LK-47 Harbour Arena Quarter, observed 3.860"), "{desc}");
}

#[test]
fn correlation_heat_map_with_printed_values() {
    let labels = ["Median income", "Unemployment", "Youth share", "Vacancy", "After-school seats"];
    let values = vec![
        vec![1.0, -0.85, -0.41, -0.22, 0.37],
        vec![-0.85, 1.0, 0.44, 0.27, -0.39],
        vec![-0.41, 0.44, 1.0, 0.12, -0.18],
        vec![-0.22, 0.27, 0.12, 1.0, f64::NAN],
        vec![0.37, -0.39, -0.18, f64::NAN, 1.0],
    ];
    let chart = CorrelationHeatMap {
        title: "How the indicators move together".into(),
        labels: labels.iter().map(|s| s.to_string()).collect(),
        values,
        measure: "Pearson correlation".into(),
        decimals: None,
        summary: String::new(),
    };
    let svg = check("heatmap_correlations", &chart);
    assert!(svg.contains(">\u{2212}0.85</text>"), "values are printed in the cells");
    let desc = element_text(&svg, "desc").expect("a desc");
    assert!(desc.contains("Median income and Unemployment, \u{2212}0.85;"), "{desc}");
    assert!(desc.contains("2 cells have no value."), "{desc}");
}

#[test]
fn correlation_heat_map_of_the_demo_indicators() {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/../../demo/larkmoor_districts.csv");
    let text = std::fs::read_to_string(path).expect("the demo table is committed");
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().expect("a header").split(',').collect();
    let columns = [
        ("assaults", "Assault rate per 10,000"),
        ("median_income", "Median household income"),
        ("unemployment_pct", "Unemployment"),
        ("youth_share_pct", "Residents aged 15\u{2013}24"),
        ("vacancy_pct", "Vacant dwellings"),
        ("alcohol_outlets_per_1k", "Licensed alcohol outlets"),
        ("afterschool_seats_per_100", "After-school programme seats per 100 youths"),
        ("streetlight_outages_per_km", "Streetlight outage reports"),
    ];
    let index = |name: &str| header.iter().position(|h| *h == name).expect("a demo column");
    let residents = index("residents");
    // Complete rows only, with the rate derived from the count as the loader does.
    let rows: Vec<Vec<f64>> = lines
        .filter_map(|line| {
            let f: Vec<&str> = line.split(',').collect();
            let people: f64 = f[residents].parse().ok()?;
            columns
                .iter()
                .map(|(c, _)| {
                    let v: f64 = f[index(c)].parse().ok()?;
                    Some(if *c == "assaults" { v / people * 10_000.0 } else { v })
                })
                .collect()
        })
        .collect();
    let pearson = |a: usize, b: usize| {
        let n = rows.len() as f64;
        let ma = rows.iter().map(|r| r[a]).sum::<f64>() / n;
        let mb = rows.iter().map(|r| r[b]).sum::<f64>() / n;
        let sab: f64 = rows.iter().map(|r| (r[a] - ma) * (r[b] - mb)).sum();
        let saa: f64 = rows.iter().map(|r| (r[a] - ma).powi(2)).sum();
        let sbb: f64 = rows.iter().map(|r| (r[b] - mb).powi(2)).sum();
        sab / (saa * sbb).sqrt()
    };
    let k = columns.len();
    let chart = CorrelationHeatMap {
        title: "Larkmoor indicators: correlations over 60 complete districts".into(),
        labels: columns.iter().map(|(_, l)| l.to_string()).collect(),
        values: (0..k).map(|i| (0..k).map(|j| pearson(i, j)).collect()).collect(),
        measure: "Pearson correlation".into(),
        decimals: None,
        summary: String::new(),
    };
    assert_eq!(rows.len(), 60, "four demo districts have an empty indicator cell");
    let svg = check("heatmap_demo", &chart);
    // The planted collinear pair (demo/README.md): r = -0.849 between income and unemployment.
    assert!(svg.contains("Median household income and Unemployment, \u{2212}0.85"), "{svg}");
}

#[test]
fn bar_chart_of_budgets_in_two_series() {
    let groups = [
        ("LK-01 Fernhollow", 115_850.0, 121_400.0),
        ("LK-02 Copperlane", 69_150.0, 64_900.0),
        ("LK-03 Quillmere Green", 84_100.0, 77_300.0),
        ("LK-04 Thistlegate", 92_950.0, 101_200.0),
        ("LK-05 Wrenmarsh", 56_750.0, f64::NAN),
    ];
    let chart = BarChart {
        title: "This year's budget and the proposed allocation".into(),
        axis: Axis::new("Prevention programme funding", "marks"),
        items: "districts".into(),
        series: vec!["This year's budget".into(), "Proposed allocation".into()],
        groups: groups
            .iter()
            .map(|(l, a, b)| BarGroup { label: l.to_string(), values: vec![*a, *b] })
            .collect(),
        threshold: None,
        decimals: Some(0),
        summary: String::new(),
    };
    let svg = check("bar_budgets", &chart);
    let desc = element_text(&svg, "desc").expect("a desc");
    assert!(
        desc.contains("LK-01 Fernhollow This year&apos;s budget 115,850, Proposed allocation 121,400"),
        "{desc}"
    );
    assert!(desc.contains("1 bar has no value"), "{desc}");
}

#[test]
fn bar_chart_with_a_threshold() {
    let chart = BarChart {
        title: "Variance inflation factors".into(),
        axis: Axis::new("Variance inflation factor", ""),
        items: "indicators".into(),
        series: Vec::new(),
        groups: [
            ("Median income", 4.1),
            ("Unemployment", 4.6),
            ("Youth share", 1.5),
            ("ln(vacancy)", 1.3),
            ("Alcohol outlets", 12.4),
        ]
        .iter()
        .map(|(l, v)| BarGroup { label: l.to_string(), values: vec![*v] })
        .collect(),
        threshold: Some(Threshold { value: 10.0, label: "Common rule-of-thumb limit".into() }),
        decimals: Some(1),
        summary: String::new(),
    };
    let svg = check("bar_vif", &chart);
    let desc = element_text(&svg, "desc").expect("a desc");
    assert!(desc.contains("1 indicator exceeds it."), "{desc}");
}

#[test]
fn bar_chart_with_negative_values() {
    let chart = BarChart {
        title: "Change in share between bases".into(),
        axis: Axis::new("Change in share of the budget", "percentage points"),
        items: "districts".into(),
        series: Vec::new(),
        groups: [
            ("LK-47 Harbour Arena Quarter", -3.4),
            ("LK-12 Juniper Steps", 1.2),
            ("LK-33 Hollowcress Cross", 0.6),
            ("LK-09 Slatemoor Heights", -0.8),
        ]
        .iter()
        .map(|(l, v)| BarGroup { label: l.to_string(), values: vec![*v] })
        .collect(),
        threshold: None,
        decimals: Some(1),
        summary: String::new(),
    };
    let svg = check("bar_negative", &chart);
    assert!(svg.contains(">\u{2212}3.4</text>"), "negative values are printed with a minus sign");
}

//! CSV: one row per experiment in plan order, with a header row. Dates are
//! ISO 8601 (`YYYY-MM-DD`); shares are fractions in (0, 1]; cells that do
//! not apply (an unscheduled test's dates) are empty. Quoting is left to the
//! `csv` crate. `pools` lists a test's pools separated by `;`; `ramp` words
//! its ramp steps ("5% 2027-01-04 to 2027-01-05, ..."), empty without one.
//! The result ranges and then the numbers behind each test (its design,
//! look dates and, when it does not fit, its detectable effect) follow the
//! plan's columns, under [`RANGE_HEADER`] and
//! [`super::numbers::CSV_HEADER`].

use super::{RenderError, RenderOptions, Renderer};
use crate::plan::{Plan, Run};

/// The CSV renderer.
pub struct Csv;

/// The header row, in column order.
pub const HEADER: [&str; 17] = [
    "id",
    "title",
    "owner",
    "pools",
    "priority",
    "status",
    "start",
    "end",
    "result_date",
    "share",
    "days",
    "units_needed",
    "units_expected",
    "reason",
    "eligible",
    "sample_size_given",
    "ramp",
];

/// The result-range columns after [`HEADER`]: the P10, P50 and P90 result
/// dates, the on-time share and, planned to a confidence, the share of
/// paths that end by the planned date (fractions), empty without a range.
pub const RANGE_HEADER: [&str; 5] = [
    "result_p10",
    "result_p50",
    "result_p90",
    "on_time",
    "on_plan",
];

/// `e`'s cells under [`RANGE_HEADER`].
fn range_cells(e: &crate::plan::PlannedExperiment) -> [String; 5] {
    let Some(r) = &e.result_range else {
        return Default::default();
    };
    let day = |d: Option<chrono::NaiveDate>| d.map(|d| d.to_string()).unwrap_or_default();
    [
        day(r.p10),
        day(r.p50),
        day(r.p90),
        r.on_time.to_string(),
        r.on_plan.map(|x| x.to_string()).unwrap_or_default(),
    ]
}

impl Renderer for Csv {
    fn render(&self, plan: &Plan, _opts: &RenderOptions) -> Result<Vec<u8>, RenderError> {
        let mut w = csv::Writer::from_writer(Vec::new());
        w.write_record(
            HEADER
                .iter()
                .chain(&RANGE_HEADER)
                .chain(&super::numbers::CSV_HEADER),
        )
        .map_err(RenderError::Csv)?;
        for e in &plan.experiments {
            let opt = |f: &dyn Fn(&Run) -> String| e.run.as_ref().map(f).unwrap_or_default();
            // A finished or cancelled test keeps the days it ran (re-plans).
            let ran = |f: &dyn Fn(&crate::plan::Ran) -> String| {
                e.ran.as_ref().filter(|_| e.run.is_none()).map(f)
            };
            let status = e.status.name();
            let row = [
                e.id.clone(),
                e.title.clone(),
                e.owner.clone(),
                e.pools.join(";"),
                e.priority.to_string(),
                status.to_string(),
                ran(&|r| r.start.to_string()).unwrap_or_else(|| opt(&|r| r.start.to_string())),
                ran(&|r| r.end.to_string()).unwrap_or_else(|| opt(&|r| r.end.to_string())),
                opt(&|r| r.result_date.to_string()),
                ran(&|r| {
                    r.share
                        .map(|s| s.fraction().to_string())
                        .unwrap_or_default()
                })
                .unwrap_or_else(|| opt(&|r| r.share.fraction().to_string())),
                ran(&|r| ((r.end - r.start).num_days() + 1).to_string())
                    .unwrap_or_else(|| opt(&|r| r.days.to_string())),
                e.units_needed.to_string(),
                opt(&|r| format!("{:.0}", r.units_expected)),
                e.reason.as_deref().unwrap_or_default().to_string(),
                e.eligible.to_string(),
                e.sample_size_given.to_string(),
                super::common::ramp_words(e).unwrap_or_default(),
            ];
            let numbers = super::numbers::csv_cells(e);
            w.write_record(row.iter().chain(&range_cells(e)).chain(&numbers))
                .map_err(RenderError::Csv)?;
        }
        w.into_inner()
            .map_err(|e| RenderError::Csv(csv::Error::from(e.into_error())))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::fixture;

    #[test]
    fn parses_back_with_one_row_per_experiment() {
        let plan = fixture::plan();
        let bytes = Csv.render(&plan, &RenderOptions::default()).unwrap();
        let mut r = csv::Reader::from_reader(bytes.as_slice());
        let header: Vec<&str> = HEADER
            .iter()
            .chain(&RANGE_HEADER)
            .chain(&crate::render::numbers::CSV_HEADER)
            .copied()
            .collect();
        assert_eq!(r.headers().unwrap(), header.as_slice());
        let rows: Vec<csv::StringRecord> = r.records().map(Result::unwrap).collect();
        assert_eq!(rows.len(), plan.experiments.len());
        for (row, e) in rows.iter().zip(&plan.experiments) {
            assert_eq!(&row[0], e.id);
            assert_eq!(&row[1], e.title);
            assert_eq!(
                row[6].to_string(),
                e.run.map(|r| r.start.to_string()).unwrap_or_default()
            );
            assert_eq!(
                row[8].to_string(),
                e.run.map(|r| r.result_date.to_string()).unwrap_or_default()
            );
            assert_eq!(row[11].parse::<u64>().unwrap(), e.units_needed);
            assert_eq!(&row[13], e.reason.as_deref().unwrap_or(""));
        }
    }
}

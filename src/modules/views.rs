//! Typed reading of the built-in modules' results: the report, the group rows and the
//! follow-up list read module outputs through the views each module crate exports, never by
//! string key.

use super::ModuleResults;
use cohortpress_metric_adherence::view::AdherenceView;
use cohortpress_metric_api::view::ModuleView;
use cohortpress_metric_energy::view::EnergyView;
use cohortpress_metric_outcomes::view::OutcomesView;
use cohortpress_metric_trend::view::TrendView;

/// Ids of the built-in modules, in their usual order.
pub const BUILTIN: [&str; 4] = [
    TrendView::MODULE,
    EnergyView::MODULE,
    AdherenceView::MODULE,
    OutcomesView::MODULE,
];

/// The typed results of the built-in modules for one participant; a module that did not run,
/// failed, or whose output does not read as its view is `None`.
#[derive(Debug, Clone, Default)]
pub struct BuiltinViews {
    /// The `trend` module's results.
    pub trend: Option<TrendView>,
    /// The `energy` module's results.
    pub energy: Option<EnergyView>,
    /// The `adherence` module's results.
    pub adherence: Option<AdherenceView>,
    /// The `outcomes` module's results.
    pub outcomes: Option<OutcomesView>,
}

impl ModuleResults {
    /// The typed view `V` of its module's output, when the module succeeded.
    ///
    /// An output that does not read as its view (a renamed output or column, a wrong type) is
    /// a bug in the module crate: debug builds and tests stop on it; release builds log it and
    /// treat the module's results as missing.
    pub fn view<V: ModuleView>(&self) -> Option<V> {
        let out = self.output(V::MODULE)?;
        match V::from_output(out) {
            Ok(v) => Some(v),
            Err(e) => {
                debug_assert!(false, "{e}");
                tracing::error!("{e}; the module's results are left out of this report");
                None
            }
        }
    }

    /// The views of every built-in module.
    pub fn views(&self) -> BuiltinViews {
        BuiltinViews {
            trend: self.view(),
            energy: self.view(),
            adherence: self.view(),
            outcomes: self.view(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn results(out: cohortpress_metric_api::ModuleOutput) -> ModuleResults {
        ModuleResults {
            outputs: vec![(TrendView::MODULE.into(), out)],
            failures: vec![],
            follow_up_flags: vec![],
        }
    }

    #[test]
    fn a_module_output_reads_as_its_view() {
        let v = TrendView::default();
        assert_eq!(results(v.to_output()).views().trend, Some(v));
        assert!(
            results(TrendView::default().to_output())
                .views()
                .energy
                .is_none()
        );
    }

    #[cfg(debug_assertions)]
    #[test]
    #[should_panic(
        expected = "module `trend`, output `periods`, column `start`: the column is missing"
    )]
    fn a_renamed_column_stops_debug_builds_instead_of_emptying_a_section() {
        let mut out = TrendView::default().to_output();
        let periods = out.tables.iter_mut().find(|t| t.name == "periods").unwrap();
        periods.columns[1].name = "from".into();
        let _ = results(out).views();
    }
}

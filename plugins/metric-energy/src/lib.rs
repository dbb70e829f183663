//! The built-in `energy` metric module of cohortpress: energy expenditure, the energy balance
//! actually achieved, and what it would take to change it.
//!
//! For one participant it computes resting energy by a published equation (selectable), activity
//! energy from MET values (2011 Compendium), total expenditure, the intake implied by the weight
//! trend through a dynamic body-weight model (Hall et al. 2011, Hall & Chow 2011) rather than the
//! static 7700 kcal/kg rule, the gap between logged and implied intake, a forecast of the
//! trajectory and its steady state, a reading of each plateau (expected slowdown or intake
//! drift), and the change in intake or walking minutes that would restore a chosen rate of loss.
//!
//! The formulas live in [`equations`] (static equations) and [`dynamics`] (body-weight
//! dynamics); [`EnergyModule`] ties them to the participant's data and to the output of the
//! `trend` module. Nothing here is medical advice: the outputs are estimates for a program team,
//! and low intakes are flagged for review by a licensed clinician.

pub mod dynamics;
pub mod equations;

mod compute;
pub mod view;

pub use dynamics::{HallModel, HallState, LinearisedModel, energy_density_of_weight_change};
pub use equations::{
    RestingEquation, activity_kcal_gross, activity_kcal_net, cunningham, harris_benedict_revised,
    henry, jackson_2002_body_fat, katch_mcardle, mifflin_st_jeor,
};

use cohortpress_metric_api::{
    MetricModule, ModuleContext, ModuleError, ModuleOutput, ModuleSpec, OutputSpec,
    ParticipantData, SettingKind, SettingSpec,
};
use serde_json::json;

/// The built-in `energy` module (see the crate docs).
#[derive(Debug, Clone, Copy, Default)]
pub struct EnergyModule;

impl MetricModule for EnergyModule {
    fn spec(&self) -> ModuleSpec {
        let settings = vec![
            SettingSpec {
                name: "equation".into(),
                kind: SettingKind::Text,
                default: json!("mifflin_st_jeor"),
                unit: String::new(),
                choices: RestingEquation::ALL
                    .iter()
                    .map(|e| e.code().to_string())
                    .collect(),
                min: None,
                max: None,
                description: "Resting energy equation; katch_mcardle and cunningham need a \
                              measured body_fat_percent and otherwise fall back to mifflin_st_jeor"
                    .into(),
            },
            SettingSpec::number(
                "base_pal",
                1.6,
                "",
                1.0,
                2.5,
                "Prior centre of the physical activity level (TEE/RMR) before logged exercise \
                 (SD pal_sd; updated from the food logs); 1.6 is the middle of the 'low active' \
                 band of NASEM 2023 for adults (1.53–1.68; Dietary Reference Intakes for Energy, \
                 doi:10.17226/26818) and of free-living adults measured with doubly \
                 labelled water (Black et al. 1996, Eur J Clin Nutr 50:72; from memory)",
            ),
            SettingSpec::number(
                "pal_sd",
                compute::PAL_SD,
                "",
                0.001,
                0.5,
                "SD of a person's activity level around base_pal before the food logs and the \
                 weight trend update it (0.20: ±2 SD spans 1.2–2.0, from the least active \
                 free-living adults to the top of the FAO/WHO/UNU 2004 'active' lifestyle \
                 category; lower it only when activity was measured, e.g. by accelerometry)",
            ),
            SettingSpec::number(
                "underreporting_prior_percent",
                100.0 * compute::UNDERREPORT_PRIOR,
                "%",
                -20.0,
                60.0,
                "Prior centre of the share of intake left out of food logs (Trabulsi & Schoeller \
                 2001: 10–45 % against doubly labelled water; from memory)",
            ),
            SettingSpec::number(
                "underreporting_sd_percent",
                100.0 * compute::UNDERREPORT_SD,
                "%",
                0.1,
                40.0,
                "Prior SD of that share, percentage points",
            ),
            SettingSpec::number(
                "max_sustained_intake_x_rmr",
                compute::MAX_SUSTAINED_INTAKE_X_RMR,
                "",
                1.5,
                6.0,
                "Most a person can take in for weeks on end, as a multiple of resting energy; an \
                 implied intake above it is read as a step in the weigh-ins or fluid, not tissue \
                 (about 2.5: Thurber et al. 2019; raise it for a program of endurance athletes)",
            ),
            SettingSpec::number(
                "very_low_implied_intake",
                compute::VERY_LOW_IMPLIED_INTAKE,
                "kcal/d",
                0.0,
                1500.0,
                "Implied intake below which the figure is withheld and a clinical flag raised: \
                 a very-low-calorie diet is 800 kcal/d or less and is followed only under \
                 medical supervision (NIH/NHLBI 1998; from memory); 0 withholds only a fall \
                 faster than eating nothing",
            ),
            SettingSpec {
                name: "window_days".into(),
                kind: SettingKind::Integer,
                default: json!(28),
                unit: "d".into(),
                choices: vec![],
                min: Some(7.0),
                max: Some(180.0),
                description: "Days at the end of the period whose trend slope gives the implied \
                              intake (28 = four whole weeks)"
                    .into(),
            },
            SettingSpec::number(
                "target_loss_kg_per_week",
                0.5,
                "kg/wk",
                0.0,
                2.0,
                "Rate of loss the 'what it takes' options aim for",
            ),
            SettingSpec::number(
                "max_safe_loss_kg_per_week",
                1.0,
                "kg/wk",
                0.1,
                2.0,
                "Fastest rate the options will propose (NIH/NHLBI 1998 guidelines: 0.5–1 kg per \
                 week; from memory)",
            ),
            SettingSpec::number(
                "intake_floor_female",
                1200.0,
                "kcal/d",
                800.0,
                3000.0,
                "Lowest intake proposed for women without clinical supervision (common practice)",
            ),
            SettingSpec::number(
                "intake_floor_male",
                1500.0,
                "kcal/d",
                800.0,
                3000.0,
                "Lowest intake proposed for men without clinical supervision (common practice)",
            ),
            SettingSpec::number(
                "drift_threshold_kcal_per_day",
                150.0,
                "kcal/d",
                0.0,
                1000.0,
                "Smallest rise in implied intake, early in the program to the plateau, called intake drift (its 95 % interval must also exclude zero)",
            ),
            SettingSpec::number(
                "walking_met",
                3.5,
                "MET",
                2.0,
                8.0,
                "MET of the walking option (3.5 = 2.8–3.2 mph, Compendium 2011 code 17190)",
            ),
            SettingSpec::number(
                "max_walk_minutes",
                compute::MAX_WALK_MIN,
                "min/d",
                10.0,
                240.0,
                "Most extra walking an option may ask for (common practice: an hour a day is 420 minutes a week, past the WHO 2020 range of 150–300); a program's guidance.max_walk_minutes is passed here, so the tidy options and the report agree",
            ),
            SettingSpec::number(
                "forecast_min_days",
                84.0,
                "d",
                0.0,
                730.0,
                "Shortest forecast horizon: the forecast runs to the program end or this many days past the period, whichever is later",
            ),
        ];
        let outputs = vec![
            OutputSpec::new(
                "rmr_kcal_per_day",
                "scalar",
                "kcal/d",
                "Resting energy at the current weight",
            ),
            OutputSpec::new(
                "activity_net_kcal_per_day",
                "scalar",
                "kcal/d",
                "Logged activity net of resting, mean over the days of the implied intake's window (the last window_days of the period)",
            ),
            OutputSpec::new(
                "tdee_kcal_per_day",
                "scalar",
                "kcal/d",
                "Implied intake minus the energy stored by the weight change; without an implied \
                 intake, RMR × the estimated activity level + net activity; over the implied \
                 intake's window (the last window_days of the period)",
            ),
            OutputSpec::new(
                "logged_intake_kcal_per_day",
                "scalar",
                "kcal/d",
                "Mean logged intake over the logged days of the implied intake's window (the last window_days of the period; missing with fewer than 4)",
            ),
            OutputSpec::new(
                "logged_days",
                "scalar",
                "d",
                "Days with an intake log in the implied intake's window (the last window_days of the period)",
            )
            .counted(),
            OutputSpec::new(
                "implied_intake_kcal_per_day",
                "scalar",
                "kcal/d",
                "Intake implied by the weight trend (Hall & Chow 2011), 95 % interval",
            ),
            OutputSpec::new(
                "intake_gap_kcal_per_day",
                "scalar",
                "kcal/d",
                "Implied minus logged intake (positive = more eaten than logged)",
            ),
            OutputSpec::new(
                "energy_balance_kcal_per_day",
                "scalar",
                "kcal/d",
                "Implied intake minus expenditure at the current weight",
            ),
            OutputSpec::new(
                "forecast_weight_at_end_kg",
                "scalar",
                "kg",
                "Model weight at the end of the forecast horizon (the program's end, or forecast_min_days after the period's end when that is later) with the implied intake and activity held",
            ),
            OutputSpec::new(
                "steady_state_weight_kg",
                "scalar",
                "kg",
                "Weight at which the model comes to rest with the implied intake held",
            ),
            OutputSpec::new(
                "body_fat_percent_baseline",
                "scalar",
                "%",
                "Baseline body fat seeding the model",
            ),
            OutputSpec::new(
                "pal_estimate",
                "scalar",
                "",
                "Baseline activity level (TEE/RMR) after combining the prior with the food logs",
            ),
            OutputSpec::new(
                "implied_intake_lower_kcal_per_day",
                "scalar",
                "kcal/d",
                "Lower 95 % bound of the implied intake (advice is checked against it)",
            ),
            OutputSpec::new(
                "implied_intake_upper_kcal_per_day",
                "scalar",
                "kcal/d",
                "Upper 95 % bound of the implied intake",
            ),
            OutputSpec::new(
                "underreporting_percent",
                "scalar",
                "%",
                "The person's own under-reporting share, estimated from every four weeks of food logs and weight trend since enrolment together (without four weeks of logs, 100·(1 − logged/implied) over the last window); not this period's difference, which is intake_gap_kcal_per_day; 95 % interval",
            ),
            OutputSpec::new("rmr_equation", "text", "", "Resting energy equation used")
                .coded::<RestingEquation>(),
            OutputSpec::new(
                "body_fat_source",
                "text",
                "",
                "`measured` or the equation that estimated it",
            )
            .coded::<view::BodyFatSource>(),
            OutputSpec::new(
                "forecast_weight",
                "series",
                "kg",
                "Daily model forecast to program end",
            ),
            OutputSpec::new(
                "weekly_energy",
                "table",
                "",
                "Expenditure, logged and implied intake by week",
            ),
            OutputSpec::new(
                "options",
                "table",
                "",
                "Change in intake, in walking, or some of each (combined: half the intake change within the floor, walking for the rest) that restores the target",
            ),
            OutputSpec::new(
                "plateau_assessment",
                "table",
                "",
                "Expected slowdown or intake drift, per plateau",
            ),
            OutputSpec::new(
                "insufficient_data",
                "flag",
                "",
                "Too few data for part of the computation",
            ),
            OutputSpec::new(
                "equation_fallback",
                "flag",
                "",
                "Lean-mass equation without body fat",
            ),
            OutputSpec::new(
                "logs_inconsistent_with_trend",
                "flag",
                "",
                "Logged intake far from implied",
            ),
            OutputSpec::new(
                "low_logged_intake",
                "flag",
                "",
                "Logged intake below the intake floor",
            ),
            OutputSpec::new(
                "unexplained_weight_change",
                "flag",
                "",
                "Weight changed faster than energy balance explains",
            ),
            OutputSpec::new(
                "very_low_implied_intake",
                "flag",
                "",
                "Weight trend implies a very low intake, or an unexplained fast loss",
            ),
            OutputSpec::new(
                "forecast_underweight",
                "flag",
                "",
                "At the current intake, weight heads below a BMI of 18.5, or further below it",
            ),
            OutputSpec::new(
                "left_before_period",
                "flag",
                "",
                "Left before the period: its energy figures not estimated",
            ),
            OutputSpec::new(
                "not_modelled",
                "flag",
                "",
                "Energy-balance estimates not made (pregnancy or breastfeeding)",
            ),
        ];
        ModuleSpec {
            id: "energy".into(),
            version: env!("CARGO_PKG_VERSION").into(),
            description: "Resting energy by a selectable published equation (Mifflin–St Jeor \
                          1990, Harris–Benedict revised 1984, Katch–McArdle, Cunningham 1980, \
                          Henry 2005), activity energy from 2011 Compendium MET values, total \
                          expenditure, the intake implied by the weight trend through the Hall \
                          et al. 2011 dynamic model and the Hall & Chow 2011 estimator, the gap \
                          to logged intake, a forecast with its steady state, plateau \
                          assessment, and the intake or walking change that would restore a \
                          chosen rate of loss."
                .into(),
            settings,
            outputs,
            requires: vec!["trend".into()],
        }
    }

    fn compute(
        &self,
        ctx: &ModuleContext,
        data: &ParticipantData,
    ) -> Result<ModuleOutput, ModuleError> {
        compute::run(ctx, data)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spec_names_the_module_its_dependency_and_defaults() {
        let spec = EnergyModule.spec();
        assert_eq!(spec.id, "energy");
        assert_eq!(spec.requires, vec!["trend".to_string()]);
        let s = spec.resolve_settings(&serde_json::Value::Null).unwrap();
        assert_eq!(s["equation"], "mifflin_st_jeor");
        assert_eq!(s["base_pal"], 1.6);
        assert_eq!(s["window_days"], 28);
        assert_eq!(s["target_loss_kg_per_week"], 0.5);
        assert_eq!(s["max_safe_loss_kg_per_week"], 1.0);
        assert_eq!(s["intake_floor_female"], 1200.0);
        assert_eq!(s["intake_floor_male"], 1500.0);
        assert_eq!(s["drift_threshold_kcal_per_day"], 150.0);
        assert_eq!(s["walking_met"], 3.5);
        assert_eq!(s["max_walk_minutes"], 60.0);
        // The under-reporting share is the whole record's estimate, not this period's gap: a
        // researcher read "Share of the implied intake missing from the food log" beside 12.3 %
        // where this period's logs were 82 % above the implied intake (a fast loser logging
        // 1,526 kcal/d against 837 implied).
        let ur = spec
            .outputs
            .iter()
            .find(|o| o.name == "underreporting_percent")
            .unwrap();
        assert!(
            ur.description.contains("since enrolment")
                && ur.description.contains("not this period's difference")
                && ur.description.contains("intake_gap_kcal_per_day"),
            "{}",
            ur.description
        );
        let bad = serde_json::json!({"equation": "guess", "base_pal": 4.0});
        assert_eq!(spec.resolve_settings(&bad).unwrap_err().len(), 2);
    }
}

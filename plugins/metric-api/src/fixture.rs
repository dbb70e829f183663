//! A small fictional participant and program for module tests (the round-trip tests of the
//! module views run every built-in module on it).
//!
//! Twelve weeks: a steady loss of about 0.6 kg a week for eight weeks, then four weeks level (a
//! plateau), weigh-ins on four days a week with a fixed, deterministic scatter; food logged on
//! five days a week, walks on three, a weekly group session, two lab results.

use crate::units::{Length, Mass};
use crate::{
    ActivityEntry, IntakeDay, LabResult, LabTest, ModuleContext, ModuleOutput, ModuleSpec,
    ParticipantData, Period, Profile, ProgramInfo, SessionRecord, Sex, Targets, UnitSystem,
    WeighIn,
};
use chrono::{Duration, NaiveDate};
use std::collections::BTreeMap;

/// First day of the program and of the participant's enrolment (a Monday).
pub fn start() -> NaiveDate {
    NaiveDate::from_ymd_opt(2026, 1, 5).expect("valid date")
}

fn day(i: i64) -> NaiveDate {
    start() + Duration::days(i)
}

/// The reporting period: the twelfth week's month (days 56–83).
pub fn period() -> Period {
    Period {
        from: day(56),
        to: day(83),
    }
}

/// The participant.
pub fn participant() -> ParticipantData {
    let weights = (0..84)
        .filter(|d| matches!(d % 7, 0 | 1 | 3 | 5))
        .map(|d| {
            let level = 92.0 - 0.6 / 7.0 * (d.min(56) as f64);
            // A fixed scatter of up to ±0.4 kg (day-to-day fluid changes).
            let scatter = 0.4 * ((d * 37 % 11) as f64 / 5.0 - 1.0);
            WeighIn {
                date: day(d),
                time: None,
                weight: Mass::from_kg(level + scatter),
                source: None,
            }
        })
        .collect();
    let intake = (0..84)
        .filter(|d| d % 7 < 5)
        .map(|d| IntakeDay {
            date: day(d),
            kcal: 1650.0 + 10.0 * (d % 5) as f64,
            carbs_g: None,
            fat_g: None,
            protein_g: None,
            free_sugars_g: None,
        })
        .collect();
    let activity = (0..84)
        .filter(|d| matches!(d % 7, 1 | 3 | 5))
        .map(|d| ActivityEntry {
            date: day(d),
            activity: "walking".into(),
            minutes: 30.0,
            met: 3.5,
            met_source: "compendium".into(),
            steps: None,
        })
        .collect();
    let sessions = (0..12)
        .map(|w| SessionRecord {
            date: day(7 * w + 2),
            session: format!("week {}", w + 1),
            attended: w % 4 != 3,
        })
        .collect();
    let labs = vec![
        LabResult {
            date: day(0),
            test: LabTest::FastingGlucose,
            value: 6.2,
            unit_as_written: "mmol/L".into(),
            value_as_written: 6.2,
            censored: None,
        },
        LabResult {
            date: day(70),
            test: LabTest::Hba1c,
            value: 5.9,
            unit_as_written: "%".into(),
            value_as_written: 5.9,
            censored: None,
        },
    ];
    ParticipantData {
        profile: Profile {
            id: "FX-001".into(),
            name: None,
            sex: Some(Sex::Female),
            birth_date: None,
            age_years: 52.0,
            height: Length::from_cm(165.0),
            enrolled: start(),
            withdrew: None,
            withdrawal_reason: Default::default(),
            groups: BTreeMap::new(),
            body_fat_percent: None,
            targets: Targets::default(),
            flags: vec![],
        },
        weights,
        intake,
        activity,
        sessions,
        labs,
    }
}

/// The context a module with `spec` gets in this program, with default settings and the
/// outputs of the modules that ran before it.
pub fn context(spec: &ModuleSpec, earlier: &[(&str, &ModuleOutput)]) -> ModuleContext {
    ModuleContext {
        program: ProgramInfo {
            id: "fixture".into(),
            title: "Fixture program".into(),
            start: start(),
            end: day(181),
            units: UnitSystem::Metric,
            targets: Targets::default(),
        },
        period: period(),
        as_of: period().to,
        settings: spec
            .resolve_settings(&serde_json::Value::Null)
            .expect("defaults are valid"),
        earlier: earlier
            .iter()
            .map(|(id, o)| (id.to_string(), (*o).clone()))
            .collect(),
    }
}

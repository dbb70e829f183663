//! `cohortpress import fhir`: HL7 FHIR R4 Patient and Observation resources (Bulk Data NDJSON,
//! a Bundle, or single resources in JSON) written as participant folders: `profile.yaml`,
//! `weights.csv` and `labs.csv`.
//!
//! Codes read (LOINC, system `http://loinc.org`): [`crate::participant::loinc`], with the
//! published FHIR material each was confirmed against.
//!
//! Weigh-in source (the `source` column of `weights.csv`: home scale, clinic, …) is read from
//! `Observation.method`, the FHIR R4 element for "the mechanism used to perform the
//! observation" (CodeableConcept; example binding to the Observation Methods value set, so a
//! local code or plain text is allowed; hl7.org/fhir/R4/observation-definitions.html): its
//! `text`, else the first coding's `display`, else that coding's `code`. Commas, quotes and
//! line breaks become `-`, and at most 64 characters are kept. Without a method the column is
//! left empty (a weigh-in of unstated source, which the trend treats like the home scale), so
//! a program exported with `method.text` = its `source` and imported again gives the same
//! metrics, including the offsets the trend estimates for clinic weigh-ins.
//!
//! Units (UCUM): `kg`, `g`, `[lb_av]` (a weight's also by its `unit` text alone: `lb`, `lbs`,
//! `pounds`, `kg` …), `cm`, `m`, `[in_i]`, `%`, `mmol/mol`, `mg/dL`, `mmol/L`,
//! `mm[Hg]`.
//!
//! Ids: a FHIR Patient id becomes a participant id through a mapping file the user controls
//! (`--ids MAP.csv` with columns `fhir_id,participant_id`); without one, a FHIR id that is
//! already a plain id (letters, digits, `-`, `_`) is used as it is. Names are never copied.
//! Existing participant folders are never changed: the import refuses them.

use crate::diag::printable as shown;
use crate::program::load::is_plain_id;
use chrono::NaiveDate;
use serde_json::Value;
use std::collections::{BTreeMap, BTreeSet};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

pub use crate::participant::loinc::{
    BODY_HEIGHT, BODY_WEIGHT, BODY_WEIGHT_MEASURED, BP_PANEL, DIASTOLIC, EGFR,
    FASTING_GLUCOSE_MASS, FASTING_GLUCOSE_MOLES, HBA1C, HBA1C_IFCC, LOINC, SYSTOLIC, WAIST,
};

/// What was read for one patient.
#[derive(Debug, Default, Clone, PartialEq)]
pub struct PatientData {
    /// `female` / `male`, when given as such.
    pub sex: Option<String>,
    /// Birth date.
    pub birth_date: Option<NaiveDate>,
    /// What the Patient gave for `gender` and `birthDate` when it is not a usable sex or a full
    /// date (`unknown`; a year or year and month, which FHIR allows): said in the profile's
    /// comment, so the person filling it in knows what the record holds.
    pub unusable: (Option<String>, Option<String>),
    /// Weigh-ins: (when, value, `kg` | `lb`, source from `Observation.method`).
    pub weights: Vec<(Taken, f64, &'static str, Option<String>)>,
    /// Heights: (local day, value, `cm` | `in`).
    pub heights: Vec<(NaiveDate, f64, &'static str)>,
    /// Lab rows: (when, test, value, unit as our labs.csv writes it, the Quantity's
    /// `comparator` when the value is a bound: `>`, `>=`, `<`, `<=`).
    pub labs: Vec<(Taken, &'static str, f64, &'static str, Option<&'static str>)>,
}

/// When an Observation was made, as the participant's CSV files say it.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
pub struct Taken {
    /// The local day: the day as written, or for a time stamped in UTC its day in the
    /// program's `input.time_zone` (its UTC day when the program sets none).
    pub date: NaiveDate,
    /// The local time, `HH:MM`, when one is given.
    pub time: Option<String>,
    /// The timestamp as the resource wrote it, when it is stamped in UTC (`Z`, `+00:00`).
    /// It goes into the CSV whole, so that a run finds its local day with the program's
    /// `input.time_zone` as it does for any UTC time in a CSV export (docs/GUIDE.md, "dates"); written
    /// as a bare day and clock time it would have been read as local, and an evening weigh-in
    /// west of Greenwich would have counted on the next day.
    pub utc_stamp: Option<String>,
}

impl Taken {
    /// The `date` and `time` cells of a CSV row.
    fn cells(&self) -> (String, String) {
        match &self.utc_stamp {
            Some(stamp) => (stamp.clone(), String::new()),
            None => (self.date.to_string(), self.time.clone().unwrap_or_default()),
        }
    }
}

/// The outcome of reading resources.
#[derive(Debug, Default)]
pub struct Imported {
    /// By FHIR patient id.
    pub patients: BTreeMap<String, PatientData>,
    /// Problems, one line each (file, what, what was done).
    pub problems: Vec<String>,
    /// Observations read.
    pub observations: usize,
    /// Observations skipped (other codes, not final, unusable).
    pub skipped: usize,
    /// The program's `input.time_zone`, when its program.yaml sets one: the local day of a
    /// time stamped in UTC.
    pub zone: Option<crate::program::files::LocalZone>,
    /// Weigh-ins and lab results read whose time is stamped in UTC.
    pub utc_stamped: usize,
}

fn codes(concept: &Value) -> Vec<&str> {
    concept["coding"]
        .as_array()
        .into_iter()
        .flatten()
        .filter(|c| c["system"].as_str() == Some(LOINC))
        .filter_map(|c| c["code"].as_str())
        .collect()
}

/// When an Observation was made: `effectiveDateTime`, `effectiveInstant` or
/// `effectivePeriod.start`, read as our CSV dates are (a time with an offset other than UTC on
/// the day as written; a UTC time on its day in `zone`, see [`Taken::utc_stamp`]).
fn effective(obs: &Value, zone: Option<crate::program::files::LocalZone>) -> Option<Taken> {
    let s = obs["effectiveDateTime"]
        .as_str()
        .or_else(|| obs["effectiveInstant"].as_str())
        .or_else(|| obs["effectivePeriod"]["start"].as_str())?;
    let opts = crate::participant::table::CsvOptions {
        time_zone: zone,
        ..Default::default()
    };
    let w = crate::participant::table::parse_when(s, &opts)?;
    Some(Taken {
        date: w.date,
        time: w.time.map(|t| t.format("%H:%M").to_string()),
        utc_stamp: w.from_utc.then(|| s.trim().to_string()),
    })
}

/// The weigh-in source an Observation states in `method` (see the module documentation).
fn method(obs: &Value) -> Option<String> {
    let m = &obs["method"];
    let coding = &m["coding"][0];
    let raw = m["text"]
        .as_str()
        .or_else(|| coding["display"].as_str())
        .or_else(|| coding["code"].as_str())?
        .trim();
    let clean: String = raw
        .chars()
        .map(|c| {
            if matches!(c, ',' | '"' | '\n' | '\r') || c.is_control() {
                '-'
            } else {
                c
            }
        })
        .take(64)
        .collect();
    (!clean.is_empty()).then_some(clean)
}

/// The `comparator` of a Quantity (`>14.0 %`: the laboratory gives a bound, a value beyond
/// the assay's range): `Ok(None)` without one, `Err` with what it holds when it is none of
/// FHIR R4's `<`, `<=`, `>=`, `>`. Without it, a bound was written to labs.csv as the plain
/// number, read as a measurement of exactly that value.
fn comparator(q: &Value) -> Result<Option<&'static str>, String> {
    match q.get("comparator") {
        None | Some(Value::Null) => Ok(None),
        Some(c) => match c.as_str() {
            Some("<") => Ok(Some("<")),
            Some("<=") => Ok(Some("<=")),
            Some(">=") => Ok(Some(">=")),
            Some(">") => Ok(Some(">")),
            _ => Err(c.to_string()),
        },
    }
}

/// `(value, UCUM code)` of a Quantity.
fn quantity(q: &Value) -> Option<(f64, &str)> {
    let v = q["value"].as_f64()?;
    let code = q["code"].as_str().or_else(|| q["unit"].as_str())?;
    Some((v, code))
}

/// The unit of a body weight's Quantity, as the weights file writes it (`kg` or `lb`), with
/// the value in it (grams to kilograms): by its UCUM `code` (`kg`, `g`, `[lb_av]`), else by its
/// `unit` text, which FHIR leaves free (R4 Quantity: `unit` is the human-readable form), in the
/// forms exports write: `kg`, `g`, `lb`, `lbs`, `[lb_av]`, `pound(s)`, any case. A weight given
/// as `{"value": 185, "unit": "lbs"}` without a code was skipped as "unit `lbs`, which is not
/// read". `Err` with the unit as written when neither is one of these.
fn weight_quantity(q: &Value) -> Option<Result<(f64, &'static str), &str>> {
    let v = q["value"].as_f64()?;
    let by_code = |c: &str| match c {
        "kg" => Some((v, "kg")),
        "g" => Some((v / 1000.0, "kg")),
        "[lb_av]" => Some((v, "lb")),
        _ => None,
    };
    let by_text = |t: &str| match t.trim().to_ascii_lowercase().as_str() {
        "kg" | "kgs" | "kilogram" | "kilograms" => Some((v, "kg")),
        "g" | "gram" | "grams" => Some((v / 1000.0, "kg")),
        "lb" | "lbs" | "[lb_av]" | "pound" | "pounds" => Some((v, "lb")),
        _ => None,
    };
    let (code, unit) = (q["code"].as_str(), q["unit"].as_str());
    if let Some(found) = code.and_then(by_code).or_else(|| unit.and_then(by_text)) {
        return Some(Ok(found));
    }
    Some(Err(code.or(unit)?))
}

/// The patient id an Observation is about: the full URL of a Patient in the same Bundle
/// (`urn:uuid:…` or an absolute URL), a relative `Patient/ID`, or an absolute
/// `https://server/base/Patient/ID` — FHIR R4 allows a reference to be relative or absolute,
/// with an optional `/_history/VERSION` (hl7.org/fhir/R4/references.html).
fn subject(obs: &Value, urls: &BTreeMap<String, String>) -> Option<String> {
    let r = obs["subject"]["reference"].as_str()?;
    if let Some(id) = urls.get(r) {
        return Some(id.clone());
    }
    let tail = match r.strip_prefix("Patient/") {
        Some(t) => t,
        None if r.contains("://") => &r[r.rfind("/Patient/")? + "/Patient/".len()..],
        None => return None,
    };
    let id = tail.split('/').next().unwrap_or(tail);
    (!id.is_empty()).then(|| id.to_string())
}

impl Imported {
    fn patient(&mut self, id: &str) -> &mut PatientData {
        self.patients.entry(id.to_string()).or_default()
    }

    /// Reads one resource (Bundles are opened).
    pub fn add(&mut self, r: &Value, urls: &BTreeMap<String, String>, origin: &str) {
        match r["resourceType"].as_str() {
            Some("Bundle") => {
                let entries = r["entry"].as_array().cloned().unwrap_or_default();
                let mut urls = urls.clone();
                for e in &entries {
                    if e["resource"]["resourceType"] == "Patient"
                        && let (Some(u), Some(id)) =
                            (e["fullUrl"].as_str(), e["resource"]["id"].as_str())
                    {
                        urls.insert(u.to_string(), id.to_string());
                    }
                }
                for e in &entries {
                    self.add(&e["resource"], &urls, origin);
                }
            }
            Some("Patient") => {
                let Some(id) = r["id"].as_str() else {
                    self.problems
                        .push(format!("{origin}: a Patient without an id is skipped"));
                    return;
                };
                let p = self.patient(id);
                // FHIR R4 AdministrativeGender: male | female | other | unknown. The last two
                // say the record holds neither value: `sex: unrecorded`, which the energy
                // equations read as either, with the added uncertainty.
                p.sex = match r["gender"].as_str() {
                    Some(g @ ("female" | "male")) => Some(g.to_string()),
                    Some("other" | "unknown") => Some("unrecorded".to_string()),
                    _ => None,
                };
                p.birth_date = r["birthDate"]
                    .as_str()
                    .and_then(|d| NaiveDate::parse_from_str(d, "%Y-%m-%d").ok());
                // Quoted back in a comment only: cut to a short plain token.
                let plain = |v: &Value| {
                    v.as_str().map(|t| {
                        t.chars()
                            .filter(|c| c.is_ascii_alphanumeric() || *c == '-')
                            .take(20)
                            .collect::<String>()
                    })
                };
                p.unusable = (
                    plain(&r["gender"]).filter(|_| p.sex.is_none()),
                    plain(&r["birthDate"]).filter(|_| p.birth_date.is_none()),
                );
            }
            Some("Observation") => self.observation(r, urls, origin),
            _ => {}
        }
    }

    fn observation(&mut self, obs: &Value, urls: &BTreeMap<String, String>, origin: &str) {
        // Every value quoted back from a resource is shown escaped (`diag::printable`): the
        // summary goes to the terminal, and an id or unit holding ESC sequences cleared the
        // screen or forged lines there.
        let id = shown(obs["id"].as_str().unwrap_or("(no id)"));
        // Entered-in-error, cancelled and registered results are not results.
        if !matches!(
            obs["status"].as_str(),
            Some("final" | "amended" | "corrected" | "preliminary")
        ) {
            self.skipped += 1;
            return;
        }
        let cs = codes(&obs["code"]);
        let known = [
            BODY_WEIGHT,
            BODY_WEIGHT_MEASURED,
            BODY_HEIGHT,
            WAIST,
            BP_PANEL,
            SYSTOLIC,
            DIASTOLIC,
            HBA1C,
            HBA1C_IFCC,
            FASTING_GLUCOSE_MASS,
            FASTING_GLUCOSE_MOLES,
        ];
        // eGFR's codes by formula (`loinc::EGFR`), read as labs.csv's `egfr`.
        let Some(&code) = cs.iter().find(|c| known.contains(c) || EGFR.contains(c)) else {
            self.skipped += 1;
            return;
        };
        let (Some(patient), Some(when)) = (subject(obs, urls), effective(obs, self.zone)) else {
            self.problems.push(format!(
                "{origin}: Observation {id} has no Patient subject or no readable effective date; it is skipped"
            ));
            self.skipped += 1;
            return;
        };
        let q = quantity(&obs["valueQuantity"]);
        // A bound (`comparator`) is kept with a lab value, as labs.csv writes it (`>14.0`);
        // a weight or height that is only a bound is no measurement.
        let bound = match comparator(&obs["valueQuantity"]) {
            Ok(b) => b,
            Err(found) => {
                self.problems.push(format!(
                    "{origin}: Observation {id} (LOINC {code}) has the comparator {}, not one of <, <=, >=, >; it is skipped",
                    shown(&found)
                ));
                self.skipped += 1;
                return;
            }
        };
        if let Some(b) = bound
            && matches!(code, BODY_WEIGHT | BODY_WEIGHT_MEASURED | BODY_HEIGHT)
        {
            self.problems.push(format!(
                "{origin}: Observation {id} (LOINC {code}) gives only a bound (`{b}`), not a measurement; it is skipped"
            ));
            self.skipped += 1;
            return;
        }
        let bad_unit = |this: &mut Self, unit: &str| {
            this.problems.push(format!(
                "{origin}: Observation {id} (LOINC {code}) has unit `{}`, which is not read; it is skipped",
                shown(unit)
            ));
            this.skipped += 1;
        };
        // No usable quantity: say what was expected and what the resource holds instead.
        let no_quantity = |this: &mut Self| {
            let mut found = obs
                .get("valueQuantity")
                .map_or_else(|| "no valueQuantity".to_string(), |v| v.to_string());
            if found.chars().count() > 80 {
                found = found.chars().take(80).collect::<String>() + "…";
            }
            this.problems.push(format!(
                "{origin}: Observation {id} (LOINC {code}) needs a valueQuantity with a numeric `value` and a UCUM `code`; found {}; it is skipped",
                shown(&found)
            ));
            this.skipped += 1;
        };
        let source = method(obs);
        match code {
            BODY_WEIGHT | BODY_WEIGHT_MEASURED => match weight_quantity(&obs["valueQuantity"]) {
                Some(Ok((v, unit))) => {
                    self.patient(&patient)
                        .weights
                        .push((when.clone(), v, unit, source))
                }
                Some(Err(u)) => return bad_unit(self, u),
                None => return no_quantity(self),
            },
            BODY_HEIGHT => match q {
                Some((v, "cm")) => self.patient(&patient).heights.push((when.date, v, "cm")),
                Some((v, "m")) => self
                    .patient(&patient)
                    .heights
                    .push((when.date, v * 100.0, "cm")),
                Some((v, "[in_i]")) => self.patient(&patient).heights.push((when.date, v, "in")),
                Some((_, u)) => return bad_unit(self, u),
                None => return no_quantity(self),
            },
            WAIST => match q {
                Some((v, "cm")) => {
                    self.patient(&patient)
                        .labs
                        .push((when.clone(), "waist", v, "cm", bound))
                }
                Some((v, "[in_i]")) => {
                    self.patient(&patient)
                        .labs
                        .push((when.clone(), "waist", v, "in", bound))
                }
                Some((_, u)) => return bad_unit(self, u),
                None => return no_quantity(self),
            },
            HBA1C | HBA1C_IFCC => match q {
                Some((v, "%")) => {
                    self.patient(&patient)
                        .labs
                        .push((when.clone(), "hba1c", v, "%", bound))
                }
                Some((v, "mmol/mol")) => {
                    self.patient(&patient)
                        .labs
                        .push((when.clone(), "hba1c", v, "mmol/mol", bound))
                }
                Some((_, u)) => return bad_unit(self, u),
                None => return no_quantity(self),
            },
            FASTING_GLUCOSE_MASS | FASTING_GLUCOSE_MOLES => match q {
                Some((v, "mg/dL")) => self.patient(&patient).labs.push((
                    when.clone(),
                    "fasting_glucose",
                    v,
                    "mg/dL",
                    bound,
                )),
                Some((v, "mmol/L")) => self.patient(&patient).labs.push((
                    when.clone(),
                    "fasting_glucose",
                    v,
                    "mmol/L",
                    bound,
                )),
                Some((_, u)) => return bad_unit(self, u),
                None => return no_quantity(self),
            },
            SYSTOLIC | DIASTOLIC => match q {
                Some((v, "mm[Hg]" | "mmHg")) => {
                    let test = if code == SYSTOLIC {
                        "systolic_bp"
                    } else {
                        "diastolic_bp"
                    };
                    self.patient(&patient)
                        .labs
                        .push((when.clone(), test, v, "mmHg", bound))
                }
                Some((_, u)) => return bad_unit(self, u),
                None => return no_quantity(self),
            },
            BP_PANEL => {
                let mut found = 0;
                for c in obs["component"].as_array().into_iter().flatten() {
                    let cc = codes(&c["code"]);
                    let test = if cc.contains(&SYSTOLIC) {
                        "systolic_bp"
                    } else if cc.contains(&DIASTOLIC) {
                        "diastolic_bp"
                    } else {
                        continue;
                    };
                    let bound = comparator(&c["valueQuantity"]).ok().flatten();
                    match quantity(&c["valueQuantity"]) {
                        Some((v, "mm[Hg]" | "mmHg")) => {
                            self.patient(&patient).labs.push((
                                when.clone(),
                                test,
                                v,
                                "mmHg",
                                bound,
                            ));
                            found += 1;
                        }
                        Some((_, u)) => bad_unit(self, u),
                        None => {}
                    }
                }
                if found == 0 {
                    self.problems.push(format!(
                        "{origin}: blood pressure panel {id} has no systolic or diastolic component in mm[Hg]; it is skipped"
                    ));
                    self.skipped += 1;
                    return;
                }
            }
            // eGFR is per 1.73 m² (UCUM `mL/min/{1.73_m2}`); `mL/min` alone may be a creatinine
            // clearance, not normalised, and is not read as one.
            c if EGFR.contains(&c) => match q {
                Some((v, "mL/min/{1.73_m2}" | "mL/min/1.73m2" | "mL/min/1.73_m2")) => self
                    .patient(&patient)
                    .labs
                    .push((when.clone(), "egfr", v, "mL/min/1.73m2", bound)),
                Some((_, u)) => return bad_unit(self, u),
                None => return no_quantity(self),
            },
            _ => unreachable!("only known codes reach here"),
        }
        self.observations += 1;
        // A height's day goes only into `enrolled`; weigh-ins and labs keep the stamp.
        if when.utc_stamp.is_some() && code != BODY_HEIGHT {
            self.utc_stamped += 1;
        }
    }

    /// Reads a file: a JSON resource (a Bundle or one resource), or NDJSON (one per line).
    pub fn read_file(&mut self, path: &Path) -> Result<(), String> {
        let bytes = crate::limits::read_input(path)
            .map_err(|e| format!("{}: cannot read the file ({e})", path.display()))?;
        let text = std::str::from_utf8(&bytes)
            .map_err(|_| format!("{}: the file is not UTF-8 JSON", path.display()))?;
        let origin = shown(&path.display().to_string()).into_owned();
        let none = BTreeMap::new();
        match serde_json::from_str::<Value>(text) {
            Ok(v) if v.is_object() => {
                self.add(&v, &none, &origin);
                Ok(())
            }
            _ => {
                // NDJSON: a line that is not JSON (a cut-off last line, a stray character) is
                // skipped and reported, so one damaged line does not lose the whole export; a
                // file with no JSON line at all is not FHIR and is refused.
                let mut bad = Vec::new();
                let mut good = 0usize;
                for (i, line) in text.lines().enumerate() {
                    if line.trim().is_empty() {
                        continue;
                    }
                    match serde_json::from_str::<Value>(line) {
                        Ok(v) => {
                            good += 1;
                            self.add(&v, &none, &format!("{origin}:{}", i + 1));
                        }
                        Err(e) => bad.push((i + 1, e)),
                    }
                }
                if good == 0 {
                    return Err(match bad.first() {
                        Some((line, e)) => format!(
                            "{origin}:{line}:{}: neither a JSON resource nor NDJSON ({e})",
                            e.column()
                        ),
                        None => format!("{origin}: the file holds no FHIR resource"),
                    });
                }
                self.skipped += bad.len();
                self.problems.extend(bad.iter().map(|(line, e)| {
                    format!(
                        "{origin}:{line}:{}: expected one JSON resource per line, found text that is not JSON ({e}); the line is skipped",
                        e.column()
                    )
                }));
                Ok(())
            }
        }
    }
}

/// Reads an id mapping file: a header with `fhir_id` and `participant_id`, then one row per
/// patient. Participant ids must be plain ids.
pub fn read_id_map(path: &Path) -> Result<BTreeMap<String, String>, String> {
    let bytes = crate::limits::read_input(path)
        .map_err(|e| format!("{}: cannot read the file ({e})", path.display()))?;
    let text = String::from_utf8(bytes)
        .map_err(|_| format!("{}: the file is not UTF-8", path.display()))?;
    let mut lines = text
        .lines()
        .enumerate()
        .filter(|(_, l)| !l.trim().is_empty());
    let (_, header) = lines
        .next()
        .ok_or_else(|| format!("{}: the file is empty", path.display()))?;
    let delim = crate::participant::table::sniff_delimiter(&text).unwrap_or(b',') as char;
    let cols: Vec<String> = header
        .split(delim)
        .map(|h| h.trim().trim_start_matches('\u{feff}').to_lowercase())
        .collect();
    let (Some(f), Some(p)) = (
        cols.iter().position(|c| c == "fhir_id"),
        cols.iter().position(|c| c == "participant_id"),
    ) else {
        return Err(format!(
            "{}:1: the header must name the columns `fhir_id` and `participant_id`",
            path.display()
        ));
    };
    let mut map = BTreeMap::new();
    // Each FHIR id's line, for naming the first of two.
    let mut mapped_at: BTreeMap<String, usize> = BTreeMap::new();
    let mut seen = BTreeSet::new();
    for (i, line) in lines {
        let fields: Vec<&str> = line.split(delim).map(str::trim).collect();
        let (Some(fid), Some(pid)) = (fields.get(f), fields.get(p)) else {
            return Err(format!("{}:{}: a value is missing", path.display(), i + 1));
        };
        // `FILE:LINE:COLUMN` of field `k` (1-based column, in characters).
        let at = |k: usize| {
            let before: usize = line
                .split(delim)
                .take(k)
                .map(|v| v.chars().count() + 1)
                .sum();
            let field = line.split(delim).nth(k).unwrap_or_default();
            let pad = field.chars().count() - field.trim_start().chars().count();
            format!("{}:{}:{}", path.display(), i + 1, before + pad + 1)
        };
        if !is_plain_id(pid) {
            return Err(format!(
                "{}: `{}` is not a usable participant id (letters, digits, `-`, `_`; at most 64)",
                at(p),
                shown(pid)
            ));
        }
        // A folder so named is skipped by every run (`check` says why): the import said it
        // had written the participant, and every run then left them out.
        if crate::participant::is_device_name(pid) {
            return Err(format!(
                "{}: `{pid}` is a device name on Windows (CON, PRN, AUX, NUL, COM1–COM9, \
                 LPT1–LPT9 in any case), which runs skip as a participant folder; map the \
                 patient to another participant id",
                at(p)
            ));
        }
        if !seen.insert(pid.to_string()) {
            return Err(format!(
                "{}: participant id `{pid}` is given to two FHIR ids",
                at(p)
            ));
        }
        // The same FHIR id twice: the last line won without a word, so a patient could be
        // written under the id of the line a reader did not look at.
        if let Some(first) = mapped_at.insert(fid.to_string(), i + 1) {
            return Err(format!(
                "{}: FHIR id `{}` is mapped twice (to `{}` on line {first}, and to `{pid}` here); \
                 one FHIR patient is one participant: keep one of the lines",
                at(f),
                shown(fid),
                map.get(*fid).map(String::as_str).unwrap_or_default()
            ));
        }
        map.insert(fid.to_string(), pid.to_string());
    }
    Ok(map)
}

/// Most by which the body heights imported for one adult may differ and still be taken (the
/// latest), cm. Repeated measurements of an adult's height agree to about 1 cm, and adults lose
/// about 1 cm a decade from middle age (common practice; from memory): heights further apart
/// are a unit or typing error in one of them, and the wrong one moves the BMI across a class
/// (180 cm and a later 168 cm at 78 kg: BMI 24.1 or 27.6, loss advice for the second), so
/// the profile is left for a person to fill in, naming them.
pub const HEIGHT_AGREE_CM: f64 = 3.0;

/// The files of one participant folder, as text.
pub fn participant_files(id: &str, p: &PatientData) -> Vec<(&'static str, String)> {
    let mut files = Vec::new();
    // Profile: enrolment is the first observation's day (FHIR has no enrolment date; check it).
    let first = p
        .weights
        .iter()
        .map(|w| w.0.date)
        .chain(p.labs.iter().map(|l| l.0.date))
        .chain(p.heights.iter().map(|h| h.0))
        .min();
    let mut profile = format!(
        "# Imported from FHIR. `enrolled` is the day of the first observation: check it.\nid: {id}\n"
    );
    let gave = |v: &Option<String>| match v {
        Some(v) if !v.is_empty() => format!("the FHIR Patient gives `{v}`"),
        _ => "not in the FHIR Patient".to_string(),
    };
    match &p.sex {
        Some(s) => writeln!(profile, "sex: {s}").expect("string"),
        None => writeln!(
            profile,
            "# sex: female | male | unrecorded   ({}: fill it in)",
            gave(&p.unusable.0)
        )
        .expect("string"),
    }
    match p.birth_date {
        Some(b) => writeln!(profile, "birth_date: {b}").expect("string"),
        None => writeln!(
            profile,
            "# birth_date: YYYY-MM-DD   ({}: fill in the whole date, or give `age:` instead)",
            gave(&p.unusable.1)
        )
        .expect("string"),
    }
    // The latest height, when the heights agree; heights that do not are not chosen between.
    let cm = |(_, v, u): &(NaiveDate, f64, &str)| if *u == "in" { v * 2.54 } else { *v };
    let spread = p.heights.iter().map(cm).fold(f64::NEG_INFINITY, f64::max)
        - p.heights.iter().map(cm).fold(f64::INFINITY, f64::min);
    match p.heights.iter().max_by_key(|h| h.0) {
        Some((_, v, u)) if spread <= HEIGHT_AGREE_CM => {
            writeln!(profile, "height: {v} {u}").expect("string")
        }
        Some(_) => {
            let mut seen: Vec<String> = p
                .heights
                .iter()
                .map(|(d, v, u)| format!("{v} {u} on {d}"))
                .collect();
            seen.sort();
            seen.dedup();
            writeln!(
                profile,
                "# height: 170 cm   (the body height observations differ by {spread:.1} cm: {}; fill in the right one)",
                seen.join(", ")
            )
            .expect("string")
        }
        None => profile.push_str("# height: 170 cm   (no body height observation: fill it in)\n"),
    }
    if let Some(d) = first {
        writeln!(profile, "enrolled: {d}").expect("string");
    }
    files.push(("profile.yaml", profile));
    if !p.weights.is_empty() {
        let mut w = p.weights.clone();
        w.sort_by(|a, b| a.0.cmp(&b.0));
        let mut t = String::from("date,time,weight,unit,source\n");
        for (when, v, u, source) in w {
            let (d, time) = when.cells();
            writeln!(t, "{d},{time},{v},{u},{}", source.unwrap_or_default()).expect("string");
        }
        files.push(("weights.csv", t));
    }
    if !p.labs.is_empty() {
        let mut l = p.labs.clone();
        l.sort_by(|a, b| (a.0.date, a.1, &a.0).cmp(&(b.0.date, b.1, &b.0)));
        let mut t = String::from("date,test,value,unit\n");
        for (when, test, v, u, bound) in l {
            let b = bound.unwrap_or_default();
            writeln!(t, "{},{test},{b}{v},{u}", when.cells().0).expect("string");
        }
        files.push(("labs.csv", t));
    }
    files
}

/// `Err` when `pid` cannot be written under `base` (`PROGRAM/participants`): its folder exists,
/// or one whose name differs from it only in case. Checked for every patient before anything is
/// written, and again under the import's lock (another import may have written it since).
fn free_in(base: &Path, pid: &str) -> Result<(), (ImportFailure, String)> {
    let dir = base.join(pid);
    // A folder the program has whose name differs only in case: on a case-sensitive file
    // system a second folder was written beside it, and `run` then leaves both out (the
    // participant already there included), while the import said it had succeeded.
    if let Some(existing) = std::fs::read_dir(base).ok().and_then(|entries| {
        entries
            .filter_map(Result::ok)
            .map(|e| e.file_name().to_string_lossy().into_owned())
            .find(|n| n != pid && n.eq_ignore_ascii_case(pid))
    }) {
        return Err((
            ImportFailure::Write,
            format!(
                "{} holds `{existing}`, which differs from `{pid}` only in case; one person \
                 would be two participant folders, and runs leave out both (the import never \
                 changes existing participant folders: map the patient to `{existing}`'s \
                 folder by hand, or to another id with --ids)",
                base.display()
            ),
        ));
    }
    if dir.exists() {
        return Err((
            ImportFailure::Write,
            format!(
                "{} already exists; the import never changes existing participant folders (import into a new program folder, or move it away)",
                dir.display()
            ),
        ));
    }
    Ok(())
}

/// The file that marks an import's staging folder as ours (`.cohortpress-import.staging/`), so
/// that a leftover one is removed only when it is ours.
const IMPORT_MARKER: &str = ".cohortpress-import";

/// The lock file of imports into a program folder (`PROGRAM/.cohortpress-import.lock`).
const IMPORT_LOCK: &str = ".cohortpress-import.lock";

/// Why an import wrote nothing.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ImportFailure {
    /// A wrong command line: an unreadable or unusable file, map or patient id.
    Usage,
    /// The participant folders cannot be written (or one exists already).
    Write,
    /// Another import into the same program folder holds its lock.
    Locked,
}

/// `cohortpress import fhir FILE… --out PROGRAM [--ids MAP.csv]`: writes one participant
/// folder per patient under `PROGRAM/participants/` and returns a summary; `Err((why, message))`
/// when nothing was written.
pub fn import(
    files: &[PathBuf],
    out: &Path,
    ids: Option<&Path>,
) -> Result<String, (ImportFailure, String)> {
    let usage = |m: String| (ImportFailure::Usage, m);
    let map = ids.map(read_id_map).transpose().map_err(usage)?;
    let mut imp = Imported::default();
    // The local day of a time stamped in UTC is the program's to say (`input.time_zone`); a
    // program.yaml that cannot be read yet gives none, and the summary says so.
    let zone_read = !out.join("program.yaml").exists()
        || crate::program::load::load_program(out).is_ok_and(|p| {
            imp.zone = p
                .def
                .input
                .time_zone
                .as_deref()
                .and_then(crate::program::files::LocalZone::parse);
            true
        });
    for f in files {
        imp.read_file(f).map_err(usage)?;
    }
    let base = out.join(crate::participant::PARTICIPANTS_DIR);
    // Every participant id first: nothing is written when one cannot be used.
    let mut plan = Vec::new();
    let mut unmapped = Vec::new();
    for (fid, data) in &imp.patients {
        let pid = match &map {
            Some(m) => match m.get(fid) {
                Some(p) => p.clone(),
                None => {
                    unmapped.push(shown(fid).into_owned());
                    continue;
                }
            },
            None if is_plain_id(fid) && !crate::participant::is_device_name(fid) => fid.clone(),
            None => {
                return Err(usage(format!(
                    "FHIR patient id `{}` is not a usable participant id{}; give `--ids MAP.csv` with columns fhir_id,participant_id",
                    shown(fid),
                    if is_plain_id(fid) {
                        " (a device name on Windows, which runs skip as a participant folder)"
                    } else {
                        ""
                    }
                )));
            }
        };
        // Two patients whose ids differ only in case name one folder on many file systems
        // (there the second could not be created, after the first was staged), and `run`
        // leaves both out: refused before anything is written.
        if let Some((other, _)) = plan
            .iter()
            .find(|(p, _): &&(String, _)| p.eq_ignore_ascii_case(&pid))
        {
            let fid_of = |p: &str| {
                imp.patients
                    .keys()
                    .find(|f| match &map {
                        Some(m) => m.get(*f).is_some_and(|q| q == p),
                        None => f.as_str() == p,
                    })
                    .cloned()
                    .unwrap_or_default()
            };
            return Err(usage(format!(
                "FHIR patients `{}` and `{}` would both be participant `{pid}`{}; one participant folder holds one person: map them to different ids with --ids, or merge their records first",
                shown(&fid_of(other)),
                shown(fid),
                if *other == pid {
                    String::new()
                } else {
                    format!(" (and `{other}`, which differs only in case)")
                }
            )));
        }
        free_in(&base, &pid)?;
        plan.push((pid, data));
    }
    // Written into a staging folder beside the participants, then moved into place one folder
    // at a time (a rename), so no participant folder is ever half-written.
    let staging = out.join(".cohortpress-import.staging");
    let io = |e: std::io::Error| {
        (
            ImportFailure::Write,
            format!("cannot write the import ({e})"),
        )
    };
    // One import at a time into a program folder: two shared the staging folder, and the
    // second removed the first's as a leftover while the first was writing into it (the run
    // lock's pattern, crate::output::Staging::begin). The file is left in place after the
    // import: removing it would let a third import lock a new file while a second still holds
    // the old one.
    std::fs::create_dir_all(out).map_err(io)?;
    let lock_path = out.join(IMPORT_LOCK);
    let lock = crate::limits::open_lock_file(&lock_path).map_err(|e| {
        (
            ImportFailure::Write,
            format!(
                "cannot use the import's lock file {} ({e})",
                lock_path.display()
            ),
        )
    })?;
    match lock.try_lock() {
        Ok(()) => {}
        Err(std::fs::TryLockError::WouldBlock) => {
            return Err((
                ImportFailure::Locked,
                format!(
                    "another cohortpress import is writing into {}; nothing was written (wait \
                     for it to finish, then import again; lock: {})",
                    out.display(),
                    lock_path.display()
                ),
            ));
        }
        Err(std::fs::TryLockError::Error(e)) => {
            return Err((
                ImportFailure::Write,
                format!(
                    "cannot use the import's lock file {} ({e})",
                    lock_path.display()
                ),
            ));
        }
    }
    // Under the lock, again: an import that finished meanwhile may have written a folder.
    for (pid, _) in &plan {
        free_in(&base, pid)?;
    }
    // A staging folder left by a killed import is removed; it is ours when it holds our marker
    // (or nothing). Anything else under the name (a folder of someone's, a link) was removed
    // with everything in it: it is refused, and nothing is written.
    if let Ok(meta) = std::fs::symlink_metadata(&staging) {
        let ours = meta.is_dir()
            && (std::fs::symlink_metadata(staging.join(IMPORT_MARKER)).is_ok_and(|m| m.is_file())
                || std::fs::read_dir(&staging).is_ok_and(|mut d| d.next().is_none()));
        if !ours {
            return Err((
                ImportFailure::Write,
                format!(
                    "{} is in the way of the import's staging folder and was not made by \
                     cohortpress; nothing was written (move it away and import again)",
                    staging.display()
                ),
            ));
        }
        std::fs::remove_dir_all(&staging).map_err(io)?;
    }
    // Stopping by SIGINT or SIGTERM removes the staging folder, as it does a run's
    // (crate::output::abandon_staging): a scheduler's stop or a Ctrl-C left it in the program
    // folder, with the identified participant files written so far, until the next import.
    #[cfg(unix)]
    crate::modules::external::watch_interrupts(crate::modules::external::Operation::Import);
    let write = || -> Result<(), String> {
        let e = |e: std::io::Error| e.to_string();
        let synced = |r: Result<(), crate::output::StagingError>| r.map_err(|e| e.to_string());
        // Registered as it is made; dropped on an error below, it is removed.
        let registered =
            crate::output::ImportStaging::create(&staging, &base, IMPORT_MARKER).map_err(e)?;
        std::fs::create_dir_all(&base).map_err(e)?;
        let mut folders = Vec::new();
        for (pid, data) in &plan {
            // Held while the folder and its files are made: an interrupt that removed the
            // staging folder meanwhile would have them made again, outside any staging.
            let _hold = registered.hold();
            let d = staging.join(pid);
            std::fs::create_dir(&d).map_err(e)?;
            for (name, text) in participant_files(pid, data) {
                std::fs::write(d.join(name), text).map_err(e)?;
            }
            folders.push(d);
        }
        // On disk before anything is moved into place, as a run's output is
        // (crate::output::sync_written): a power cut after the renames left participant
        // folders whose files were empty or cut short, under the names `run` reads.
        synced(crate::output::sync_written(
            &staging,
            folders.iter().map(PathBuf::as_path),
        ))?;
        // Moved into place and the staging folder removed with no interrupt between: one
        // removes the staging folder before the first folder is moved, or comes after.
        registered.finish(|| {
            for (pid, _) in &plan {
                std::fs::rename(staging.join(pid), base.join(pid))?;
            }
            Ok(())
        })?;
        // The new names themselves (and `participants` when the import made it).
        synced(crate::output::sync_dir(&base))?;
        synced(crate::output::sync_dir(out))
    };
    // A failed import leaves no staging behind: what was not moved into place is removed (the
    // folders already moved are whole, and the message says the import failed).
    if let Err(e) = write() {
        let _ = std::fs::remove_dir_all(&staging);
        return Err((
            ImportFailure::Write,
            format!("cannot write the import ({e})"),
        ));
    }
    let mut s = format!(
        "imported {} participant{} ({} observations; {} skipped) into {}",
        plan.len(),
        if plan.len() == 1 { "" } else { "s" },
        imp.observations,
        imp.skipped,
        base.display()
    );
    if !unmapped.is_empty() {
        write!(
            s,
            "\n{} FHIR patient{} not in the id map {} left out: {}",
            unmapped.len(),
            if unmapped.len() == 1 { "" } else { "s" },
            if unmapped.len() == 1 { "was" } else { "were" },
            unmapped.join(", ")
        )
        .expect("string");
    }
    for p in &imp.problems {
        write!(s, "\nskipped: {p}").expect("string");
    }
    if imp.utc_stamped > 0 {
        let n = imp.utc_stamped;
        match imp.zone {
            Some(z) => write!(
                s,
                "\n{n} observation{} stamped in UTC: weights.csv and labs.csv keep {} as written, \
                 and a run counts {} on {} day in {} (`input.time_zone`), as `enrolled` does",
                if n == 1 { " is" } else { "s are" },
                if n == 1 { "its time" } else { "their times" },
                if n == 1 { "it" } else { "them" },
                if n == 1 { "its" } else { "their" },
                z.name()
            ),
            None => write!(
                s,
                "\n{n} observation{} stamped in UTC, and {}: weights.csv and labs.csv keep the \
                 times as written, and a run counts them on their UTC day until \
                 `input.time_zone` is set (then check `enrolled`, the UTC day of the first \
                 observation)",
                if n == 1 { " is" } else { "s are" },
                if zone_read {
                    "the program sets no `input.time_zone`"
                } else {
                    "the program's time zone could not be read (its program.yaml has errors: \
                     run `cohortpress check`)"
                }
            ),
        }
        .expect("string");
    }
    if !out.join("program.yaml").exists() {
        s.push_str("\nthe folder has no program.yaml yet: write one (see “program.yaml” in docs/GUIDE.md) before `check` or `run`");
    }
    s.push_str("\nnext: `cohortpress check` the program, and check each profile's `enrolled` date");
    Ok(s)
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    /// A Bundle written from the structure of the specification's examples: a Patient, a body
    /// weight in `[lb_av]` (as R4 `observation-example`), a height in cm, a blood pressure
    /// panel with its two components in `mm[Hg]` (as R4 `observation-example-bloodpressure`),
    /// an HbA1c in %, a fasting glucose in mg/dL, a waist in `[in_i]`, and things to skip.
    fn bundle() -> Value {
        let obs = |id: &str, code: &str, when: &str, value: Value| {
            let mut o = json!({
                "resourceType": "Observation", "id": id, "status": "final",
                "category": [{"coding": [{"system": "http://terminology.hl7.org/CodeSystem/observation-category", "code": "vital-signs"}]}],
                "code": {"coding": [{"system": LOINC, "code": code}]},
                "subject": {"reference": "urn:uuid:7c1b2f7e-0000-4000-8000-000000000001"},
                "effectiveDateTime": when
            });
            if !value.is_null() {
                o["valueQuantity"] = value;
            }
            json!({"fullUrl": format!("urn:uuid:{id}"), "resource": o})
        };
        let ucum = |v: f64, code: &str| json!({"value": v, "unit": code, "system": "http://unitsofmeasure.org", "code": code});
        let mut bp = obs("bp1", BP_PANEL, "2027-03-02T09:30:00+01:00", Value::Null);
        bp["resource"]["component"] = json!([
            {"code": {"coding": [{"system": LOINC, "code": SYSTOLIC}]}, "valueQuantity": ucum(128.0, "mm[Hg]")},
            {"code": {"coding": [{"system": LOINC, "code": DIASTOLIC}]}, "valueQuantity": ucum(82.0, "mm[Hg]")}
        ]);
        // The second weigh-in states its setting in `method` (a local code with a display whose
        // comma must not split the CSV row).
        let mut w2 = obs("w2", BODY_WEIGHT, "2027-03-08", ucum(83.1, "kg"));
        w2["resource"]["method"] = json!({"coding": [{"system": "urn:example:weigh-in-setting",
            "code": "clinic", "display": "clinic, clothed"}]});
        let mut wrong = obs("w-err", BODY_WEIGHT, "2027-03-03", ucum(999.0, "kg"));
        wrong["resource"]["status"] = json!("entered-in-error");
        json!({
            "resourceType": "Bundle", "type": "collection",
            "entry": [
                {"fullUrl": "urn:uuid:7c1b2f7e-0000-4000-8000-000000000001",
                 "resource": {"resourceType": "Patient", "id": "7c1b2f7e", "gender": "female",
                              "birthDate": "1980-05-17", "name": [{"family": "Example"}]}},
                obs("w1", BODY_WEIGHT, "2027-03-01T07:12:00+01:00", ucum(185.0, "[lb_av]")),
                w2,
                obs("h1", BODY_HEIGHT, "2027-03-01", ucum(170.2, "cm")),
                bp,
                obs("a1", HBA1C, "2027-03-02", ucum(5.9, "%")),
                obs("g1", FASTING_GLUCOSE_MASS, "2027-03-02", ucum(101.0, "mg/dL")),
                obs("wc", WAIST, "2027-03-02", ucum(36.5, "[in_i]")),
                obs("st", BODY_WEIGHT, "2027-03-09", ucum(13.0, "[stone_av]")),
                obs("hr", "8867-4", "2027-03-02", ucum(64.0, "/min")),
                obs("gf", "62238-1", "2027-03-02", ucum(52.0, "mL/min/{1.73_m2}")),
                wrong
            ]
        })
    }

    #[test]
    fn a_bundle_gives_profile_weights_and_labs() {
        let mut imp = Imported::default();
        imp.add(&bundle(), &BTreeMap::new(), "b.json");
        // eGFR (62238-1) is read, as labs.csv's `egfr`: it was skipped as a code not read.
        assert_eq!(imp.observations, 8);
        // Heart rate (not read), stone (unit not read), entered-in-error.
        assert_eq!(imp.skipped, 3);
        assert_eq!(imp.problems.len(), 1, "{:?}", imp.problems);
        assert!(imp.problems[0].contains("[stone_av]"));
        let files = participant_files("LW-0001", &imp.patients["7c1b2f7e"]);
        let get = |n: &str| files.iter().find(|f| f.0 == n).unwrap().1.clone();
        let profile = get("profile.yaml");
        assert!(
            profile.contains(
                "sex: female\nbirth_date: 1980-05-17\nheight: 170.2 cm\nenrolled: 2027-03-01\n"
            ),
            "{profile}"
        );
        assert!(!profile.contains("Example"), "names are never copied");
        assert_eq!(
            get("weights.csv"),
            "date,time,weight,unit,source\n2027-03-01,07:12,185,lb,\n2027-03-08,,83.1,kg,clinic- clothed\n"
        );
        assert_eq!(
            get("labs.csv"),
            "date,test,value,unit\n2027-03-02,diastolic_bp,82,mmHg\n2027-03-02,egfr,52,mL/min/1.73m2\n2027-03-02,fasting_glucose,101,mg/dL\n2027-03-02,hba1c,5.9,%\n2027-03-02,systolic_bp,128,mmHg\n2027-03-02,waist,36.5,in\n"
        );
    }

    /// Two body heights of one patient 12 cm apart (180 cm, then 168 cm: one of them a typing
    /// or unit error) gave `height: 168 cm`, the latest, silently: at 78 kg a BMI of 27.6
    /// ("pre-obese", loss advice) where the other gives 24.1. Heights that differ by more than
    /// HEIGHT_AGREE_CM are not chosen between: the line is left for a person to fill in, naming
    /// them. Heights that agree (170.2 cm and 67 in, 170.18 cm) give the latest, as before.
    #[test]
    fn heights_that_disagree_are_left_to_fill_in() {
        let mut b = bundle();
        let entries = b["entry"].as_array_mut().unwrap();
        let h = |id: &str, day: &str, v: f64, u: &str| {
            let mut o = entries
                .iter()
                .find(|e| e["resource"]["id"] == "h1")
                .unwrap()
                .clone();
            o["resource"]["id"] = json!(id);
            o["resource"]["effectiveDateTime"] = json!(day);
            o["resource"]["valueQuantity"] = json!({"value": v, "unit": u,
                "system": "http://unitsofmeasure.org", "code": u});
            o
        };
        let agree = h("h2", "2027-03-05", 67.0, "[in_i]");
        let apart = h("h3", "2027-03-06", 158.0, "cm");
        entries.push(agree);
        let mut imp = Imported::default();
        imp.add(&b, &BTreeMap::new(), "b.json");
        let files = participant_files("LW-0001", &imp.patients["7c1b2f7e"]);
        assert!(files[0].1.contains("\nheight: 67 in\n"), "{}", files[0].1);
        b["entry"].as_array_mut().unwrap().push(apart);
        let mut imp = Imported::default();
        imp.add(&b, &BTreeMap::new(), "b.json");
        let files = participant_files("LW-0001", &imp.patients["7c1b2f7e"]);
        let profile = &files[0].1;
        assert!(!profile.contains("\nheight:"), "{profile}");
        assert!(
            profile.contains("# height: 170 cm   (the body height observations differ by 12.2 cm: 158 cm on 2027-03-06, 170.2 cm on 2027-03-01, 67 in on 2027-03-05; fill in the right one)"),
            "{profile}"
        );
    }

    /// A time stamped in UTC counts on its local day in the program's zone: a weigh-in at
    /// 02:30Z is 22:30 the evening before in New York. The CSV keeps the stamp whole, so a run
    /// converts it as it does a CSV export's UTC times; written as `2026-04-02,02:30` it was
    /// read as a local time, on the wrong day, and `enrolled` was a day after the first
    /// weigh-in. A weight coded 3141-9 (Body weight Measured) alone is read as a weight.
    #[test]
    fn a_utc_time_counts_on_its_local_day_and_is_written_whole() {
        let obs = |id: &str, code: &str, when: &str, v: f64, unit: &str| {
            json!({"resourceType": "Observation", "id": id, "status": "final",
                "code": {"coding": [{"system": LOINC, "code": code}]},
                "subject": {"reference": "Patient/p1"}, "effectiveDateTime": when,
                "valueQuantity": {"value": v, "system": "http://unitsofmeasure.org", "code": unit}})
        };
        let bundle = json!({"resourceType": "Bundle", "type": "collection", "entry": [
            {"resource": {"resourceType": "Patient", "id": "p1", "gender": "male", "birthDate": "1979-01-02"}},
            {"resource": obs("w1", BODY_WEIGHT, "2026-04-02T02:30:00Z", 91.5, "kg")},
            {"resource": obs("w2", BODY_WEIGHT_MEASURED, "2026-04-09T07:00:00-04:00", 90.8, "kg")},
            {"resource": obs("a1", HBA1C, "2026-04-02T03:05:00+00:00", 6.1, "%")},
        ]});
        let read = |zone: Option<&str>| {
            let mut imp = Imported {
                zone: zone.and_then(crate::program::files::LocalZone::parse),
                ..Default::default()
            };
            imp.add(&bundle, &BTreeMap::new(), "b.json");
            assert_eq!((imp.observations, imp.skipped, imp.utc_stamped), (3, 0, 2));
            participant_files("P1", &imp.patients["p1"])
        };
        let files = read(Some("America/New_York"));
        assert!(
            files[0].1.contains("\nenrolled: 2026-04-01\n"),
            "{}",
            files[0].1
        );
        assert_eq!(
            files[1].1,
            "date,time,weight,unit,source\n2026-04-02T02:30:00Z,,91.5,kg,\n2026-04-09,07:00,90.8,kg,\n"
        );
        assert_eq!(
            files[2].1,
            "date,test,value,unit\n2026-04-02T03:05:00+00:00,hba1c,6.1,%\n"
        );
        // Without a zone the UTC day stands (and the import's summary says so).
        let files = read(None);
        assert!(
            files[0].1.contains("\nenrolled: 2026-04-02\n"),
            "{}",
            files[0].1
        );
        assert!(files[1].1.contains("\n2026-04-02T02:30:00Z,,91.5,kg,\n"));
    }

    /// A body weight whose Quantity has a `unit` text and no UCUM `code`: pounds written `lbs`,
    /// `lb`, `LBS`, `pounds` or `[lb_av]` are read as pounds (the weights file keeps `lb`, and a
    /// run converts them to kg at 0.45359237 kg/lb); `lbs` and `lb` were skipped as "unit `lbs`,
    /// which is not read". A UCUM code wins over the text. A unit it cannot read is still
    /// skipped with a problem naming the file, the Observation and the unit.
    #[test]
    fn a_weight_in_pounds_written_as_unit_text_is_read() {
        let obs = |id: &str, day: &str, q: Value| {
            json!({"resourceType": "Observation", "id": id, "status": "final",
                "code": {"coding": [{"system": LOINC, "code": BODY_WEIGHT}]},
                "subject": {"reference": "Patient/p1"}, "effectiveDateTime": day,
                "valueQuantity": q})
        };
        let bundle = json!({"resourceType": "Bundle", "type": "collection", "entry": [
            {"resource": {"resourceType": "Patient", "id": "p1", "gender": "female", "birthDate": "1980-05-06"}},
            {"resource": obs("w1", "2026-04-01", json!({"value": 185.0, "unit": "lbs"}))},
            {"resource": obs("w2", "2026-04-02", json!({"value": 184.5, "unit": "lb"}))},
            {"resource": obs("w3", "2026-04-03", json!({"value": 184.0, "unit": " LBS "}))},
            {"resource": obs("w4", "2026-04-04", json!({"value": 183.5, "unit": "pounds"}))},
            {"resource": obs("w5", "2026-04-05", json!({"value": 183.0, "unit": "[lb_av]"}))},
            {"resource": obs("w6", "2026-04-06", json!({"value": 82.9, "unit": "lbs", "system": "http://unitsofmeasure.org", "code": "kg"}))},
            {"resource": obs("w7", "2026-04-07", json!({"value": 82700.0, "unit": "grams"}))},
            {"resource": obs("w8", "2026-04-08", json!({"value": 13.0, "unit": "stone"}))},
        ]});
        let mut imp = Imported::default();
        imp.add(&bundle, &BTreeMap::new(), "b.json");
        assert_eq!((imp.observations, imp.skipped), (7, 1));
        assert_eq!(
            imp.problems,
            [
                "b.json: Observation w8 (LOINC 29463-7) has unit `stone`, which is not read; it is skipped"
            ]
        );
        let files = participant_files("P1", &imp.patients["p1"]);
        assert_eq!(
            files[1].1,
            "date,time,weight,unit,source\n2026-04-01,,185,lb,\n2026-04-02,,184.5,lb,\n\
             2026-04-03,,184,lb,\n2026-04-04,,183.5,lb,\n2026-04-05,,183,lb,\n\
             2026-04-06,,82.9,kg,\n2026-04-07,,82.7,kg,\n"
        );
    }

    /// A subject given as an absolute URL, with or without a version, is the same patient as
    /// `Patient/ID` (it was skipped as "no Patient subject").
    #[test]
    fn a_subject_given_as_an_absolute_url_is_read() {
        let refs = [
            "Patient/p7",
            "Patient/p7/_history/3",
            "https://fhir.example.org/r4/Patient/p7",
            "https://fhir.example.org/r4/Patient/p7/_history/2",
        ];
        for r in refs {
            let obs = json!({"subject": {"reference": r}});
            assert_eq!(
                subject(&obs, &BTreeMap::new()).as_deref(),
                Some("p7"),
                "{r}"
            );
        }
        for r in [
            "Group/g1",
            "https://fhir.example.org/r4/Group/g1",
            "Patient/",
            "urn:uuid:1",
        ] {
            let obs = json!({"subject": {"reference": r}});
            assert_eq!(subject(&obs, &BTreeMap::new()), None, "{r}");
        }
        let urls = BTreeMap::from([("urn:uuid:1".to_string(), "p9".to_string())]);
        let obs = json!({"subject": {"reference": "urn:uuid:1"}});
        assert_eq!(subject(&obs, &urls).as_deref(), Some("p9"));
    }

    /// FHIR allows a birth date of a year or a year and month, and a gender of `other` or
    /// `unknown`: the profile leaves them to be filled in (nothing is guessed) and says what the
    /// record gave; a value that is not a plain token is not quoted.
    #[test]
    fn a_partial_birth_date_and_an_unknown_gender_are_named_not_guessed() {
        let patient = |id: &str, gender: &str, born: &str| json!({"resourceType": "Patient", "id": id, "gender": gender, "birthDate": born});
        let weight = |pid: &str| {
            json!({"resourceType": "Observation", "id": format!("w-{pid}"), "status": "final",
                   "code": {"coding": [{"system": LOINC, "code": BODY_WEIGHT}]},
                   "subject": {"reference": format!("Patient/{pid}")},
                   "effectiveDateTime": "2027-03-01",
                   "valueQuantity": {"value": 91.0, "code": "kg"}})
        };
        let mut imp = Imported::default();
        for r in [
            patient("p-1", "unknown", "1980"),
            patient("p-2", "female", "1975-06"),
            patient("p-3", "<b>x</b>", "1990-02-30"),
            weight("p-1"),
            weight("p-2"),
            weight("p-3"),
        ] {
            imp.add(&r, &BTreeMap::new(), "p.ndjson");
        }
        let profile = |pid: &str| {
            participant_files(pid, &imp.patients[pid])
                .into_iter()
                .find(|f| f.0 == "profile.yaml")
                .unwrap()
                .1
        };
        let p1 = profile("p-1");
        // FHIR's `unknown` (and `other`): the record holds neither value.
        assert!(p1.contains("\nsex: unrecorded\n"), "{p1}");
        assert!(
            p1.contains(
                "# birth_date: YYYY-MM-DD   (the FHIR Patient gives `1980`: fill in the whole \
                 date, or give `age:` instead)\n"
            ),
            "{p1}"
        );
        let p2 = profile("p-2");
        assert!(
            p2.contains(
                "sex: female\n# birth_date: YYYY-MM-DD   (the FHIR Patient gives `1975-06`"
            ),
            "{p2}"
        );
        // An impossible date is not a birth date either; markup is not copied.
        let p3 = profile("p-3");
        assert!(
            p3.contains(
                "# sex: female | male | unrecorded   (the FHIR Patient gives `bxb`: fill it in)"
            ),
            "{p3}"
        );
        assert!(p3.contains("gives `1990-02-30`"), "{p3}");
        assert!(!p3.contains('<'), "{p3}");
    }

    #[test]
    fn a_damaged_ndjson_line_is_skipped_and_a_file_without_json_is_refused() {
        let tmp = tempfile::tempdir().unwrap();
        let nd = tmp.path().join("export.ndjson");
        let good = json!({"resourceType": "Observation", "id": "w1", "status": "final",
               "code": {"coding": [{"system": LOINC, "code": BODY_WEIGHT}]},
               "subject": {"reference": "Patient/p-1"},
               "effectiveDateTime": "2027-03-01",
               "valueQuantity": {"value": 91.0, "code": "kg"}});
        // The last line was cut off in the middle of a resource.
        std::fs::write(&nd, format!("{good}\n{{\"resourceType\": \"Observ\n")).unwrap();
        let mut imp = Imported::default();
        imp.read_file(&nd).unwrap();
        assert_eq!(imp.observations, 1);
        assert_eq!(imp.skipped, 1);
        assert_eq!(imp.problems.len(), 1, "{:?}", imp.problems);
        let origin = nd.display().to_string();
        assert!(
            imp.problems[0].starts_with(&format!("{origin}:2:")),
            "{:?}",
            imp.problems
        );
        assert!(imp.problems[0].ends_with("the line is skipped"));
        // A file with no JSON line at all (a CSV given by mistake) is refused, naming line 1.
        let csv = tmp.path().join("weights.csv");
        std::fs::write(&csv, "date,weight\n2027-03-01,91\n").unwrap();
        let e = Imported::default().read_file(&csv).unwrap_err();
        assert!(
            e.starts_with(&format!(
                "{}:1:1: neither a JSON resource nor NDJSON",
                csv.display()
            )),
            "{e}"
        );
    }

    #[test]
    fn a_quantity_without_a_number_says_what_it_found() {
        let mut imp = Imported::default();
        let obs = json!({"resourceType": "Observation", "id": "h1", "status": "final",
               "code": {"coding": [{"system": LOINC, "code": BODY_HEIGHT}]},
               "subject": {"reference": "Patient/p-1"},
               "effectiveDateTime": "2027-03-01",
               "valueQuantity": {"value": "170", "code": "cm"}});
        imp.add(&obs, &BTreeMap::new(), "h.ndjson:3");
        assert_eq!(imp.skipped, 1);
        assert_eq!(
            imp.problems,
            vec![
                "h.ndjson:3: Observation h1 (LOINC 8302-2) needs a valueQuantity with a numeric \
                 `value` and a UCUM `code`; found {\"code\":\"cm\",\"value\":\"170\"}; it is skipped"
                    .to_string()
            ]
        );
    }

    #[test]
    fn ndjson_and_id_maps() {
        let tmp = tempfile::tempdir().unwrap();
        let nd = tmp.path().join("Observation.ndjson");
        let lines = [
            json!({"resourceType": "Patient", "id": "p-1", "gender": "male", "birthDate": "1970-01-02"}),
            json!({"resourceType": "Observation", "id": "o1", "status": "final",
                   "code": {"coding": [{"system": LOINC, "code": BODY_WEIGHT}]},
                   "subject": {"reference": "Patient/p-1"},
                   "effectiveDateTime": "2027-03-01T06:00:00Z",
                   "valueQuantity": {"value": 90.5, "code": "kg", "system": "http://unitsofmeasure.org"}}),
            json!({"resourceType": "Observation", "id": "o2", "status": "final",
                   "code": {"coding": [{"system": LOINC, "code": FASTING_GLUCOSE_MOLES}]},
                   "subject": {"reference": "Patient/p-1"},
                   "effectiveDateTime": "2027-03-02",
                   "valueQuantity": {"value": 5.4, "code": "mmol/L"}}),
        ];
        let text: String = lines.iter().map(|l| format!("{l}\n")).collect();
        std::fs::write(&nd, text).unwrap();
        let map = tmp.path().join("ids.csv");
        std::fs::write(&map, "fhir_id,participant_id\np-1,NV-007\n").unwrap();
        let out = tmp.path().join("prog");
        let s = import(std::slice::from_ref(&nd), &out, Some(&map)).unwrap();
        assert!(
            s.starts_with("imported 1 participant (2 observations; 0 skipped)"),
            "{s}"
        );
        let dir = out.join("participants/NV-007");
        assert_eq!(
            std::fs::read_to_string(dir.join("labs.csv")).unwrap(),
            "date,test,value,unit\n2027-03-02,fasting_glucose,5.4,mmol/L\n"
        );
        // A second import never touches the existing folder.
        let before = std::fs::read_to_string(dir.join("weights.csv")).unwrap();
        let e = import(std::slice::from_ref(&nd), &out, Some(&map)).unwrap_err();
        assert_eq!(e.0, ImportFailure::Write);
        assert_eq!(
            std::fs::read_to_string(dir.join("weights.csv")).unwrap(),
            before
        );
        // Without a map a plain FHIR id is used as it is; a map must name its columns.
        std::fs::write(&map, "fhir,id\np-1,X\n").unwrap();
        assert!(
            import(&[nd], &out, Some(&map))
                .unwrap_err()
                .1
                .contains("fhir_id")
        );
    }

    /// A laboratory's bound (`valueQuantity.comparator`, FHIR R4 Quantity: `>14.0 %`, a value
    /// beyond the assay's range) was written to labs.csv as the plain number, `14`, and read as
    /// a measurement of exactly 14 %. It is written with its comparator (`>14`), as labs.csv
    /// reads it; a weight that is only a bound, or a comparator FHIR R4 does not define, is
    /// skipped with a problem naming the Observation.
    #[test]
    fn a_lab_bound_keeps_its_comparator_and_a_weight_bound_is_skipped() {
        let obs = |id: &str, code: &str, q: Value| {
            json!({"resourceType": "Observation", "id": id, "status": "final",
                "code": {"coding": [{"system": LOINC, "code": code}]},
                "subject": {"reference": "Patient/p1"}, "effectiveDateTime": "2026-04-02",
                "valueQuantity": q})
        };
        let ucum = |v: f64, code: &str, cmp: Option<&str>| {
            let mut q = json!({"value": v, "system": "http://unitsofmeasure.org", "code": code});
            if let Some(c) = cmp {
                q["comparator"] = json!(c);
            }
            q
        };
        let bundle = json!({"resourceType": "Bundle", "type": "collection", "entry": [
            {"resource": {"resourceType": "Patient", "id": "p1", "gender": "male", "birthDate": "1979-01-02"}},
            {"resource": obs("a1", HBA1C, ucum(14.0, "%", Some(">")))},
            {"resource": obs("g1", FASTING_GLUCOSE_MOLES, ucum(2.0, "mmol/L", Some("<=")))},
            {"resource": obs("w0", BODY_WEIGHT, ucum(91.5, "kg", None))},
            {"resource": obs("w1", BODY_WEIGHT, ucum(150.0, "kg", Some(">")))},
            {"resource": obs("a2", HBA1C, ucum(5.0, "%", Some("about")))},
        ]});
        let mut imp = Imported::default();
        imp.add(&bundle, &BTreeMap::new(), "b.json");
        assert_eq!(
            (imp.observations, imp.skipped),
            (3, 2),
            "{:?}",
            imp.problems
        );
        assert!(
            imp.problems.iter().any(|p| p.contains(
                "Observation w1 (LOINC 29463-7) gives only a bound (`>`), not a measurement"
            )),
            "{:?}",
            imp.problems
        );
        assert!(
            imp.problems.iter().any(|p| p
                .contains("Observation a2 (LOINC 4548-4) has the comparator `\"about\"`")
                || p.contains("Observation a2 (LOINC 4548-4) has the comparator \"about\"")),
            "{:?}",
            imp.problems
        );
        let files = participant_files("P1", &imp.patients["p1"]);
        let labs = &files.iter().find(|f| f.0 == "labs.csv").unwrap().1;
        assert_eq!(
            labs,
            "date,test,value,unit\n2026-04-02,fasting_glucose,<=2,mmol/L\n2026-04-02,hba1c,>14,%\n"
        );
    }
}

//! The portfolio file as written: serde structs that mirror the YAML keys
//! one to one and refuse unknown keys.
//!
//! Nothing is checked here beyond the YAML types: every field is optional
//! and every date, enum and id is text, so that the validator
//! (`portfolio::validate`) can report every problem with its own message
//! and position instead of stopping at serde's first. docs/portfolio.md
//! documents each key.

use serde::de::{self, Deserializer, Visitor};
use serde::Deserialize;
use std::fmt;

/// Any scalar read as text: ids such as `2027` or `true` stay ids.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Text(pub String);

impl<'de> Deserialize<'de> for Text {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Text, D::Error> {
        struct V;
        impl Visitor<'_> for V {
            type Value = Text;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("text")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<Text, E> {
                Ok(Text(v.to_string()))
            }
            fn visit_string<E: de::Error>(self, v: String) -> Result<Text, E> {
                Ok(Text(v))
            }
            fn visit_bool<E: de::Error>(self, v: bool) -> Result<Text, E> {
                Ok(Text(v.to_string()))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<Text, E> {
                Ok(Text(v.to_string()))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<Text, E> {
                Ok(Text(v.to_string()))
            }
            fn visit_i128<E: de::Error>(self, v: i128) -> Result<Text, E> {
                Ok(Text(v.to_string()))
            }
            fn visit_u128<E: de::Error>(self, v: u128) -> Result<Text, E> {
                Ok(Text(v.to_string()))
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<Text, E> {
                Ok(Text(v.to_string()))
            }
        }
        d.deserialize_any(V)
    }
}

impl Text {
    pub fn as_str(&self) -> &str {
        &self.0
    }
}

#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawPortfolio {
    pub id: Option<Text>,
    pub name: Option<Text>,
    pub window: Option<RawWindow>,
    pub defaults: Option<RawDefaults>,
    pub share_levels: Option<Vec<f64>>,
    pub planning: Option<RawPlanning>,
    pub pools: Option<Vec<RawPool>>,
    pub experiments: Option<Vec<RawExperiment>>,
    pub blackouts: Option<Vec<RawBlackout>>,
}

#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawWindow {
    pub start: Option<Text>,
    pub end: Option<Text>,
}

#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawDefaults {
    pub alpha: Option<f64>,
    pub power: Option<f64>,
    pub sides: Option<Text>,
    pub rate_method: Option<Text>,
    pub mean_method: Option<Text>,
    pub correction: Option<Text>,
    pub min_days: Option<f64>,
    pub whole_weeks: Option<bool>,
    pub looks: Option<f64>,
    pub boundary: Option<Text>,
    pub guardrail_alpha: Option<f64>,
    pub holdout: Option<f64>,
}

#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawPlanning {
    pub start_grid: Option<Text>,
    pub start_weekday: Option<Text>,
    pub lateness_weight: Option<f64>,
    pub reshare_running: Option<bool>,
    pub seed: Option<f64>,
    pub paths: Option<f64>,
    pub confidence: Option<f64>,
    pub srm_alpha: Option<f64>,
}

#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawPool {
    pub id: Option<Text>,
    pub label: Option<Text>,
    pub daily: Option<f64>,
    pub weekday_pattern: Option<Vec<f64>>,
    pub history: Option<Text>,
    pub trend: Option<bool>,
    pub events: Option<Vec<RawEvent>>,
    pub adjustments: Option<Vec<RawAdjustment>>,
    pub sharing: Option<Text>,
    pub max_concurrent: Option<f64>,
    pub uncertainty: Option<RawUncertainty>,
    pub holdout: Option<f64>,
}

/// A known event in a history: `{from, to, note}`.
#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawEvent {
    pub from: Option<Text>,
    pub to: Option<Text>,
    pub note: Option<Text>,
}

#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawUncertainty {
    pub level_cv: Option<f64>,
    pub daily_cv: Option<f64>,
}

#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawAdjustment {
    pub from: Option<Text>,
    pub to: Option<Text>,
    pub multiply: Option<f64>,
    pub level: Option<f64>,
    pub note: Option<Text>,
}

#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawExperiment {
    pub id: Option<Text>,
    pub title: Option<Text>,
    pub owner: Option<Text>,
    pub pool: Option<Text>,
    pub pools: Option<Vec<Text>>,
    pub metric: Option<Text>,
    pub baseline: Option<f64>,
    pub sd: Option<f64>,
    pub mde: Option<f64>,
    pub mde_abs: Option<f64>,
    pub arms: Option<f64>,
    pub ratio: Option<f64>,
    pub rho: Option<f64>,
    pub alpha: Option<f64>,
    pub power: Option<f64>,
    pub sides: Option<Text>,
    pub method: Option<Text>,
    pub correction: Option<Text>,
    pub priority: Option<f64>,
    pub earliest_start: Option<Text>,
    pub deadline: Option<Text>,
    pub max_share: Option<f64>,
    pub min_days: Option<f64>,
    pub whole_weeks: Option<bool>,
    pub looks: Option<f64>,
    pub boundary: Option<Text>,
    pub after: Option<Vec<RawAfter>>,
    pub not_with: Option<Vec<RawNotWith>>,
    pub metrics: Option<Vec<RawMetric>>,
    pub guardrail_alpha: Option<f64>,
    pub eligible: Option<f64>,
    pub sample_size: Option<f64>,
    pub ramp: Option<Vec<RawRampStep>>,
    pub ramp_counts: Option<bool>,
}

/// A `ramp` step: a share held for some days.
#[derive(Debug, Clone, PartialEq, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawRampStep {
    pub share: Option<f64>,
    pub days: Option<f64>,
}

/// A `not_with` entry: an id (kept apart in time), or an id with `apart`.
#[derive(Debug, Clone, PartialEq)]
pub enum RawNotWith {
    Id(Text),
    Apart(RawApart),
}

#[derive(Debug, Clone, PartialEq, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawApart {
    pub id: Option<Text>,
    pub apart: Option<Text>,
}

impl<'de> Deserialize<'de> for RawNotWith {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<RawNotWith, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = RawNotWith;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("an experiment id, or a mapping with `id` and `apart`")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<RawNotWith, E> {
                Ok(RawNotWith::Id(Text(v.to_string())))
            }
            fn visit_string<E: de::Error>(self, v: String) -> Result<RawNotWith, E> {
                Ok(RawNotWith::Id(Text(v)))
            }
            fn visit_bool<E: de::Error>(self, v: bool) -> Result<RawNotWith, E> {
                Ok(RawNotWith::Id(Text(v.to_string())))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<RawNotWith, E> {
                Ok(RawNotWith::Id(Text(v.to_string())))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<RawNotWith, E> {
                Ok(RawNotWith::Id(Text(v.to_string())))
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<RawNotWith, E> {
                Ok(RawNotWith::Id(Text(v.to_string())))
            }
            fn visit_map<A: de::MapAccess<'de>>(self, map: A) -> Result<RawNotWith, A::Error> {
                RawApart::deserialize(de::value::MapAccessDeserializer::new(map))
                    .map(RawNotWith::Apart)
            }
        }
        d.deserialize_any(V)
    }
}

/// A `metrics` entry: one metric of a test and its role.
#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawMetric {
    pub name: Option<Text>,
    pub role: Option<Text>,
    pub metric: Option<Text>,
    pub baseline: Option<f64>,
    pub sd: Option<f64>,
    pub mde: Option<f64>,
    pub mde_abs: Option<f64>,
    pub rho: Option<f64>,
    pub method: Option<Text>,
    pub margin: Option<f64>,
    pub margin_abs: Option<f64>,
}

/// An `after` entry: an id, or an id with a gap.
#[derive(Debug, Clone, PartialEq)]
pub enum RawAfter {
    Id(Text),
    WithGap(RawAfterGap),
}

#[derive(Debug, Clone, PartialEq, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawAfterGap {
    pub id: Option<Text>,
    pub gap_days: Option<f64>,
}

impl<'de> Deserialize<'de> for RawAfter {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<RawAfter, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = RawAfter;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("an experiment id, or a mapping with `id` and `gap_days`")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<RawAfter, E> {
                Ok(RawAfter::Id(Text(v.to_string())))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<RawAfter, E> {
                Ok(RawAfter::Id(Text(v.to_string())))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<RawAfter, E> {
                Ok(RawAfter::Id(Text(v.to_string())))
            }
            fn visit_map<A: de::MapAccess<'de>>(self, map: A) -> Result<RawAfter, A::Error> {
                RawAfterGap::deserialize(de::value::MapAccessDeserializer::new(map))
                    .map(RawAfter::WithGap)
            }
        }
        d.deserialize_any(V)
    }
}

#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawBlackout {
    pub from: Option<Text>,
    pub to: Option<Text>,
    pub kind: Option<Text>,
    pub note: Option<Text>,
    pub pools: Option<Vec<Text>>,
}

/// The keys a struct accepts, read from its serde derive (so the list in
/// error messages can never drift from the structs).
pub fn fields_of<'de, T: Deserialize<'de>>() -> &'static [&'static str] {
    struct Probe<'a>(&'a mut &'static [&'static str]);
    impl<'de> Deserializer<'de> for Probe<'_> {
        type Error = de::value::Error;
        fn deserialize_any<V: Visitor<'de>>(self, _: V) -> Result<V::Value, Self::Error> {
            Err(de::Error::custom("probe"))
        }
        fn deserialize_struct<V: Visitor<'de>>(
            self,
            _name: &'static str,
            fields: &'static [&'static str],
            _: V,
        ) -> Result<V::Value, Self::Error> {
            *self.0 = fields;
            Err(de::Error::custom("probe"))
        }
        serde::forward_to_deserialize_any! {
            bool i8 i16 i32 i64 i128 u8 u16 u32 u64 u128 f32 f64 char str string
            bytes byte_buf option unit unit_struct newtype_struct seq tuple
            tuple_struct map enum identifier ignored_any
        }
    }
    let mut fields: &'static [&'static str] = &[];
    let _ = T::deserialize(Probe(&mut fields));
    fields
}

/// The keys allowed in the mapping at `shape` (a path with indices removed,
/// see `position::shape`), or `None` where the file has no mapping.
pub fn allowed_keys(shape: &str) -> Option<&'static [&'static str]> {
    Some(match shape {
        "" => fields_of::<RawPortfolio>(),
        "window" => fields_of::<RawWindow>(),
        "defaults" => fields_of::<RawDefaults>(),
        "planning" => fields_of::<RawPlanning>(),
        "pools[]" => fields_of::<RawPool>(),
        "pools[].adjustments[]" => fields_of::<RawAdjustment>(),
        "pools[].events[]" => fields_of::<RawEvent>(),
        "pools[].uncertainty" => fields_of::<RawUncertainty>(),
        "experiments[]" => fields_of::<RawExperiment>(),
        "experiments[].after[]" => fields_of::<RawAfterGap>(),
        "experiments[].metrics[]" => fields_of::<RawMetric>(),
        "experiments[].ramp[]" => fields_of::<RawRampStep>(),
        "experiments[].not_with[]" => fields_of::<RawApart>(),
        "blackouts[]" => fields_of::<RawBlackout>(),
        _ => return None,
    })
}

/// The trade's common words for what a sluice key holds, at the mapping
/// shape where sluice has the key: an unknown key found here gets a hint
/// naming sluice's key instead of the closest spelling.
const TRADE_WORDS: &[(&[&str], &[&str], &str)] = &[
    (
        &["experiments[]"],
        &["traffic_split", "traffic_allocation", "allocation", "traffic", "exposure"],
        "sluice chooses each test's share of its pool; `max_share` caps it (e.g. `max_share: 0.5`)",
    ),
    (
        &["experiments[]"],
        &["mutually_exclusive", "exclusive_with", "exclusion_group", "conflicts_with"],
        "tests that must never run at the same time are listed in `not_with` (e.g. `not_with: [other-test]`)",
    ),
    (
        &["experiments[]"],
        &[
            "sample_size_per_variant",
            "sample_size_per_arm",
            "users_per_variant",
            "sample_per_variant",
        ],
        "a control arm's size known from elsewhere is `sample_size` (treatment arms get `ratio` x it); otherwise sluice sizes the test from `baseline`, `mde` or `mde_abs`, `alpha`, `power`, `arms` (and `sd` for a mean)",
    ),
    (
        &["experiments[]", "defaults"],
        &["variants", "variations", "num_variants", "groups"],
        "the number of arms, control included, is `arms` (e.g. `arms: 3` for control and two treatments)",
    ),
    (
        &["experiments[]", "defaults"],
        &["confidence", "confidence_level", "significance", "significance_level"],
        "the type I error is `alpha` (a confidence of 95% is `alpha: 0.05`)",
    ),
    (
        &["experiments[]", "experiments[].metrics[]"],
        &["minimum_detectable_effect", "lift", "uplift"],
        "the smallest effect worth finding is `mde` (relative, 0.05 = 5%) or `mde_abs` (in the metric's units)",
    ),
    (
        &["experiments[]", "experiments[].metrics[]"],
        &["conversion_rate", "baseline_rate", "control_rate"],
        "the control's rate or mean is `baseline`",
    ),
];

/// The hint for an unknown `key` at `shape` that is one of the trade's
/// common words for a sluice key, if it is one.
pub fn trade_word_hint(shape: &str, key: &str) -> Option<&'static str> {
    let key = key.to_ascii_lowercase().replace('-', "_");
    TRADE_WORDS
        .iter()
        .find(|(shapes, words, _)| shapes.contains(&shape) && words.contains(&key.as_str()))
        .map(|(_, _, hint)| *hint)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_trades_words_point_at_sluices_keys() {
        let hint = |shape, key| trade_word_hint(shape, key).unwrap_or("");
        assert!(hint("experiments[]", "traffic_split").contains("`max_share`"));
        assert!(hint("experiments[]", "Mutually-Exclusive").contains("`not_with`"));
        assert!(hint("experiments[]", "sample_size_per_variant").contains("`sample_size`"));
        assert!(hint("defaults", "variants").contains("`arms`"));
        // Only where sluice has the key, and never for a key it accepts.
        assert_eq!(trade_word_hint("pools[]", "variants"), None);
        for (shapes, words, _) in TRADE_WORDS {
            for shape in *shapes {
                let allowed = allowed_keys(shape).unwrap();
                for w in *words {
                    assert!(!allowed.contains(w), "{w} is a key of {shape}");
                }
            }
        }
    }

    #[test]
    fn field_lists_come_from_the_structs() {
        assert_eq!(fields_of::<RawWindow>(), &["start", "end"]);
        assert!(allowed_keys("experiments[]").unwrap().contains(&"not_with"));
        assert_eq!(
            allowed_keys("experiments[].after[]").unwrap(),
            &["id", "gap_days"]
        );
        assert_eq!(allowed_keys("pools[].weekday_pattern"), None);
    }

    #[test]
    fn scalars_of_any_kind_are_text_and_after_takes_two_forms() {
        let e: RawExperiment =
            serde_yaml::from_str("id: 2027\nafter: [a, 7, {id: b, gap_days: 2}]\nnot_with: [true]")
                .unwrap();
        assert_eq!(e.id, Some(Text("2027".into())));
        let after = e.after.unwrap();
        assert_eq!(after[0], RawAfter::Id(Text("a".into())));
        assert_eq!(after[1], RawAfter::Id(Text("7".into())));
        assert_eq!(
            after[2],
            RawAfter::WithGap(RawAfterGap {
                id: Some(Text("b".into())),
                gap_days: Some(2.0)
            })
        );
        assert_eq!(
            e.not_with.unwrap(),
            vec![RawNotWith::Id(Text("true".into()))]
        );
    }

    #[test]
    fn docs_portfolio_md_documents_every_key() {
        let doc = include_str!("../../docs/portfolio.md");
        for shape in [
            "",
            "window",
            "defaults",
            "planning",
            "pools[]",
            "pools[].adjustments[]",
            "pools[].events[]",
            "pools[].uncertainty",
            "experiments[]",
            "experiments[].after[]",
            "experiments[].metrics[]",
            "experiments[].ramp[]",
            "experiments[].not_with[]",
            "blackouts[]",
        ] {
            for key in allowed_keys(shape).unwrap() {
                assert!(
                    doc.contains(&format!("| `{key}` |")),
                    "docs/portfolio.md has no row for `{key}` ({shape})"
                );
            }
        }
    }

    #[test]
    fn unknown_keys_are_refused() {
        let r: Result<RawWindow, _> = serde_yaml::from_str("start: x\nstrat: y");
        assert!(r.unwrap_err().to_string().contains("unknown field `strat`"));
    }
}

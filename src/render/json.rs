//! JSON: the whole plan, pretty-printed, keys in the order of the structs in
//! `crate::plan` (documented in docs/plan-json.md), ending in a newline.

use super::{RenderError, RenderOptions, Renderer};
use crate::plan::Plan;

/// The JSON renderer.
pub struct Json;

impl Renderer for Json {
    fn render(&self, plan: &Plan, _opts: &RenderOptions) -> Result<Vec<u8>, RenderError> {
        let mut out = serde_json::to_vec_pretty(plan).map_err(RenderError::Json)?;
        out.push(b'\n');
        Ok(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::fixture;

    #[test]
    fn parses_back_into_the_same_plan() {
        let plan = fixture::plan();
        let bytes = Json.render(&plan, &RenderOptions::default()).unwrap();
        let back: Plan = serde_json::from_slice(&bytes).unwrap();
        assert_eq!(back, plan);
    }

    #[test]
    fn keys_keep_the_documented_order() {
        let bytes = Json
            .render(&fixture::plan(), &RenderOptions::default())
            .unwrap();
        let text = String::from_utf8(bytes).unwrap();
        let order = [
            "\"portfolio\"",
            "\"window\"",
            "\"solver\"",
            "\"greedy_value\"",
            "\"experiments\"",
            "\"pools\"",
            "\"blackouts\"",
            "\"today\"",
        ];
        let positions: Vec<usize> = order.iter().map(|k| text.find(k).unwrap()).collect();
        assert!(positions.windows(2).all(|w| w[0] < w[1]), "{positions:?}");
    }
}

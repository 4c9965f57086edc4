//! JSON parsing whose errors name the field at fault (`runs[2].ef_pct: invalid type …`), not
//! only the line and column, so a hand-edited sidecar or results file is easy to fix.

use serde::de::DeserializeOwned;

/// Parses `text` as `T`.
///
/// # Errors
/// The parser's message, prefixed with the path of the field at fault when there is one.
pub fn parse<T: DeserializeOwned>(text: &str) -> Result<T, String> {
    let mut de = serde_json::Deserializer::from_str(text);
    let value: T = serde_path_to_error::deserialize(&mut de).map_err(|e| {
        let path = e.path().to_string();
        if path == "." || path.is_empty() {
            e.inner().to_string()
        } else {
            format!("field `{path}`: {}", e.inner())
        }
    })?;
    de.end().map_err(|e| e.to_string())?;
    Ok(value)
}

#[cfg(test)]
mod tests {
    #[derive(Debug, serde::Deserialize)]
    struct Outer {
        #[allow(dead_code)]
        runs: Vec<Inner>,
    }
    #[derive(Debug, serde::Deserialize)]
    struct Inner {
        #[allow(dead_code)]
        ef_pct: f64,
    }

    #[test]
    fn errors_name_the_field_path_and_the_position() {
        let e =
            super::parse::<Outer>(r#"{"runs": [{"ef_pct": 50}, {"ef_pct": "high"}]}"#).unwrap_err();
        assert!(e.starts_with("field `runs[1].ef_pct`: invalid type"), "{e}");
        assert!(e.contains("line 1 column"), "{e}");
        let e = super::parse::<Outer>("{\"runs\": []} x").unwrap_err();
        assert!(e.contains("trailing characters"), "{e}");
    }
}

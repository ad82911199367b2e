//! The envelope every Spinney JSON file shares (the model file, the study file): one object
//! with `format`, `version` (`{"major": N, "minor": N}`) and `written_by`. It is checked
//! before the contents, so a file of another kind or a newer major version is refused for
//! what it is, not for some field it lacks.

/// Why an envelope is refused.
pub(crate) enum Refusal {
    /// Not this kind of file, or no readable version: the reason.
    Bad(String),
    /// A newer major version than this Spinney reads.
    Newer {
        major: u64,
        minor: u64,
        written_by: String,
    },
}

/// Checks `value` is a `format` file (called `noun`, such as "model file") of major version
/// 1 to `reads`. `others` names other formats with what to say about them.
pub(crate) fn check(
    value: &serde_json::Value,
    format: &str,
    noun: &str,
    reads: u64,
    others: &[(&str, &str)],
) -> Result<(), Refusal> {
    let Some(object) = value.as_object() else {
        return Err(Refusal::Bad(format!(
            "it is JSON but not a Spinney {noun} (a {noun} is one JSON object)"
        )));
    };
    match object.get("format").and_then(|f| f.as_str()) {
        Some(f) if f == format => {}
        Some(other) => {
            let known = others.iter().find(|(f, _)| *f == other);
            return Err(Refusal::Bad(match known {
                Some((_, said)) => said.to_string(),
                None => format!(
                    "it is JSON of format '{other}', not a Spinney {noun} (format '{format}')"
                ),
            }));
        }
        None => {
            return Err(Refusal::Bad(format!(
                "it is JSON but not a Spinney {noun} (it has no \"format\": \"{format}\")"
            )))
        }
    }
    let version = object.get("version");
    let number = |key: &str| version.and_then(|v| v.get(key)).and_then(|n| n.as_u64());
    let (Some(major), Some(minor)) = (number("major"), number("minor")) else {
        return Err(Refusal::Bad(
            "its \"version\" is missing or is not {\"major\": N, \"minor\": N}".into(),
        ));
    };
    if major > reads {
        let written_by = object
            .get("written_by")
            .and_then(|w| w.as_str())
            .unwrap_or("a newer Spinney")
            .to_string();
        return Err(Refusal::Newer {
            major,
            minor,
            written_by,
        });
    }
    if major == 0 {
        return Err(Refusal::Bad(
            "it has format version 0, which no Spinney wrote".into(),
        ));
    }
    Ok(())
}

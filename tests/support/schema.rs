//! A validator for the part of JSON Schema (draft 2020-12) that copyloop's generated schemas
//! use: `$ref` into `$defs`, `type`, `enum`, `const`, `anyOf`/`oneOf`/`allOf`, `properties`,
//! `required`, `additionalProperties`, `items`, `prefixItems`, `minItems`/`maxItems` and
//! `minimum` (the keywords' meaning is the specification's, json-schema.org, draft 2020-12
//! \[M\]). `format` is an annotation and is not checked, as the specification allows.

use serde_json::Value;

/// Whether an object schema that declares `properties` and says nothing of
/// `additionalProperties` rejects keys it does not declare. The specification's default is
/// open; `Yes` makes the check two-way: the output may hold no key the schema does not name.
#[derive(Clone, Copy, PartialEq)]
pub enum Closed {
    Yes,
    No,
}

/// Checks `doc` against `schema`; the error names the JSON path of the first mismatch.
pub fn validate(schema: &Value, doc: &Value, closed: Closed) -> Result<(), String> {
    check(schema, schema, doc, "$", closed)
}

fn resolve<'a>(root: &'a Value, reference: &str) -> Result<&'a Value, String> {
    let name = reference
        .strip_prefix("#/$defs/")
        .ok_or_else(|| format!("unsupported $ref {reference}"))?;
    root.get("$defs")
        .and_then(|d| d.get(name))
        .ok_or_else(|| format!("dangling $ref {reference}"))
}

fn type_matches(t: &str, v: &Value) -> bool {
    match t {
        "null" => v.is_null(),
        "boolean" => v.is_boolean(),
        "object" => v.is_object(),
        "array" => v.is_array(),
        "string" => v.is_string(),
        "number" => v.is_number(),
        "integer" => v.is_i64() || v.is_u64() || v.as_f64().is_some_and(|x| x.fract() == 0.0),
        _ => false,
    }
}

fn check(root: &Value, s: &Value, v: &Value, path: &str, closed: Closed) -> Result<(), String> {
    let s = match s {
        Value::Bool(true) => return Ok(()),
        Value::Bool(false) => return Err(format!("{path}: no value is allowed here")),
        Value::Object(m) => m,
        _ => return Err(format!("{path}: a schema must be an object or a boolean")),
    };
    if let Some(r) = s.get("$ref").and_then(Value::as_str) {
        check(root, resolve(root, r)?, v, path, closed)?;
    }
    if let Some(t) = s.get("type") {
        let ok = match t {
            Value::String(t) => type_matches(t, v),
            Value::Array(ts) => ts
                .iter()
                .filter_map(Value::as_str)
                .any(|t| type_matches(t, v)),
            _ => false,
        };
        if !ok {
            return Err(format!("{path}: {v} is not of type {t}"));
        }
    }
    if let Some(c) = s.get("const") {
        if c != v {
            return Err(format!("{path}: {v} is not {c}"));
        }
    }
    if let Some(Value::Array(options)) = s.get("enum") {
        if !options.contains(v) {
            return Err(format!("{path}: {v} is not one of {options:?}"));
        }
    }
    if let Some(Value::Array(all)) = s.get("allOf") {
        for sub in all {
            check(root, sub, v, path, closed)?;
        }
    }
    for (key, exactly_one) in [("anyOf", false), ("oneOf", true)] {
        if let Some(Value::Array(options)) = s.get(key) {
            let results: Vec<_> = options
                .iter()
                .map(|sub| check(root, sub, v, path, closed))
                .collect();
            let passed = results.iter().filter(|r| r.is_ok()).count();
            if passed == 0 || (exactly_one && passed > 1) {
                let why: Vec<String> = results.into_iter().filter_map(Result::err).collect();
                return Err(format!(
                    "{path}: {passed} of the {key} alternatives match ({})",
                    why.join("; ")
                ));
            }
        }
    }
    if let (Some(min), Some(x)) = (s.get("minimum").and_then(Value::as_f64), v.as_f64()) {
        if x < min {
            return Err(format!("{path}: {x} is below the minimum {min}"));
        }
    }
    if let Value::Object(obj) = v {
        check_object(root, s, obj, path, closed)?;
    }
    if let Value::Array(items) = v {
        check_array(root, s, items, path, closed)?;
    }
    Ok(())
}

fn check_object(
    root: &Value,
    s: &serde_json::Map<String, Value>,
    obj: &serde_json::Map<String, Value>,
    path: &str,
    closed: Closed,
) -> Result<(), String> {
    if let Some(Value::Array(required)) = s.get("required") {
        for key in required.iter().filter_map(Value::as_str) {
            if !obj.contains_key(key) {
                return Err(format!("{path}: the required key `{key}` is missing"));
            }
        }
    }
    let properties = s.get("properties").and_then(Value::as_object);
    for (key, value) in obj {
        let here = format!("{path}.{key}");
        match (
            properties.and_then(|p| p.get(key)),
            s.get("additionalProperties"),
        ) {
            (Some(sub), _) => check(root, sub, value, &here, closed)?,
            (None, Some(extra)) => check(root, extra, value, &here, closed)?,
            (None, None) if properties.is_some() && closed == Closed::Yes => {
                return Err(format!("{path}: the key `{key}` is not in the schema"));
            }
            (None, None) => {}
        }
    }
    Ok(())
}

fn check_array(
    root: &Value,
    s: &serde_json::Map<String, Value>,
    items: &[Value],
    path: &str,
    closed: Closed,
) -> Result<(), String> {
    let len = items.len() as u64;
    if let Some(min) = s.get("minItems").and_then(Value::as_u64) {
        if len < min {
            return Err(format!("{path}: {len} items, fewer than {min}"));
        }
    }
    if let Some(max) = s.get("maxItems").and_then(Value::as_u64) {
        if len > max {
            return Err(format!("{path}: {len} items, more than {max}"));
        }
    }
    let prefix = s
        .get("prefixItems")
        .and_then(Value::as_array)
        .map_or(&[][..], Vec::as_slice);
    for (k, item) in items.iter().enumerate() {
        let here = format!("{path}[{k}]");
        match (prefix.get(k), s.get("items")) {
            (Some(sub), _) | (None, Some(sub)) => check(root, sub, item, &here, closed)?,
            (None, None) => {}
        }
    }
    Ok(())
}

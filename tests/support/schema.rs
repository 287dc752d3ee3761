//! A validator for the part of JSON Schema (draft 2020-12) that copyloop's generated schemas
//! use: `$ref` into `$defs`, `type`, `enum`, `const`, `anyOf`/`oneOf`/`allOf`, `properties`,
//! `required`, `additionalProperties`, `items`, `prefixItems`, `minItems`/`maxItems` and
//! `minimum` (the keywords' meaning is the specification's, json-schema.org, draft 2020-12
//! \[M\]). `format` is an annotation and is not checked, as the specification allows.

use serde_json::Value;

/// Whether an object may hold keys that no schema at its place declares. The specification's
/// default is open; `Yes` makes the check two-way, as `unevaluatedProperties: false` at every
/// object would: the output may hold no key the schema does not name. A key counts as declared
/// when `properties` names it, `additionalProperties` admits it, or a subschema applied at the
/// same place (`$ref`, `allOf`, a matching `anyOf`/`oneOf` branch) declares it.
#[derive(Clone, Copy, PartialEq)]
pub enum Closed {
    Yes,
    No,
}

/// Checks `doc` against `schema`; the error names the JSON path of the first mismatch.
pub fn validate(schema: &Value, doc: &Value, closed: Closed) -> Result<(), String> {
    check(schema, schema, doc, "$", closed).map(|_| ())
}

/// The keys a schema declares at one place.
enum Declared {
    All,
    Names(Vec<String>),
}

impl Declared {
    fn join(&mut self, other: Declared) {
        match (&mut *self, other) {
            (Declared::All, _) => {}
            (_, Declared::All) => *self = Declared::All,
            (Declared::Names(a), Declared::Names(b)) => a.extend(b),
        }
    }

    fn has(&self, key: &str) -> bool {
        match self {
            Declared::All => true,
            Declared::Names(n) => n.iter().any(|k| k == key),
        }
    }
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

fn check(
    root: &Value,
    s: &Value,
    v: &Value,
    path: &str,
    closed: Closed,
) -> Result<Declared, String> {
    let s = match s {
        Value::Bool(true) => return Ok(Declared::All),
        Value::Bool(false) => return Err(format!("{path}: no value is allowed here")),
        Value::Object(m) => m,
        _ => return Err(format!("{path}: a schema must be an object or a boolean")),
    };
    let describes_objects = [
        "properties",
        "additionalProperties",
        "$ref",
        "allOf",
        "anyOf",
        "oneOf",
    ]
    .iter()
    .any(|k| s.contains_key(*k))
        || s.get("type").is_some_and(|t| t == "object");
    let mut declared = if describes_objects {
        Declared::Names(Vec::new())
    } else {
        Declared::All
    };
    if let Some(r) = s.get("$ref").and_then(Value::as_str) {
        declared.join(check(root, resolve(root, r)?, v, path, Closed::No)?);
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
            declared.join(check(root, sub, v, path, Closed::No)?);
        }
    }
    for (key, exactly_one) in [("anyOf", false), ("oneOf", true)] {
        if let Some(Value::Array(options)) = s.get(key) {
            let mut passed = 0;
            let mut why = Vec::new();
            for sub in options {
                match check(root, sub, v, path, Closed::No) {
                    Ok(d) => {
                        passed += 1;
                        declared.join(d);
                    }
                    Err(e) => why.push(e),
                }
            }
            if passed == 0 || (exactly_one && passed > 1) {
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
        declared.join(check_object(root, s, obj, path)?);
        if closed == Closed::Yes {
            if let Some(key) = obj.keys().find(|k| !declared.has(k)) {
                return Err(format!("{path}: the key `{key}` is not in the schema"));
            }
        }
    }
    if let Value::Array(items) = v {
        check_array(root, s, items, path)?;
    }
    Ok(declared)
}

/// Checks the keys this schema itself names; returns what it declares.
fn check_object(
    root: &Value,
    s: &serde_json::Map<String, Value>,
    obj: &serde_json::Map<String, Value>,
    path: &str,
) -> Result<Declared, String> {
    if let Some(Value::Array(required)) = s.get("required") {
        for key in required.iter().filter_map(Value::as_str) {
            if !obj.contains_key(key) {
                return Err(format!("{path}: the required key `{key}` is missing"));
            }
        }
    }
    let properties = s.get("properties").and_then(Value::as_object);
    let extra = s.get("additionalProperties");
    for (key, value) in obj {
        let here = format!("{path}.{key}");
        match (properties.and_then(|p| p.get(key)), extra) {
            (Some(sub), _) | (None, Some(sub)) => {
                check(root, sub, value, &here, Closed::Yes)?;
            }
            (None, None) => {}
        }
    }
    Ok(match (extra, properties) {
        (Some(_), _) => Declared::All,
        (None, Some(p)) => Declared::Names(p.keys().cloned().collect()),
        (None, None) => Declared::Names(Vec::new()),
    })
}

fn check_array(
    root: &Value,
    s: &serde_json::Map<String, Value>,
    items: &[Value],
    path: &str,
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
            (Some(sub), _) | (None, Some(sub)) => {
                check(root, sub, item, &here, Closed::Yes)?;
            }
            (None, None) => {}
        }
    }
    Ok(())
}

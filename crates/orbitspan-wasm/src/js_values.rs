//! Conversions between core values and JavaScript values.

use js_sys::{Float64Array, Object, Reflect, Uint8ClampedArray};
use orbitspan_core::{Error, Image};
use serde::de::DeserializeOwned;
use serde::Serialize;
use wasm_bindgen::JsValue;

/// A core error as a JavaScript `Error` named `BadInput`, `Cancelled` or
/// `InternalError`, with the core's message.
pub fn error(e: Error) -> JsValue {
    let name = match &e {
        Error::Cancelled => "Cancelled",
        e if e.is_bad_input() => "BadInput",
        _ => "InternalError",
    };
    let js = js_sys::Error::new(&e.to_string());
    js.set_name(name);
    js.into()
}

/// A plain object (maps as objects, `None` as `null`) from a serialisable value.
pub fn to_js<T: Serialize>(value: &T) -> Result<JsValue, JsValue> {
    let serializer = serde_wasm_bindgen::Serializer::new().serialize_maps_as_objects(true).serialize_missing_as_null(true);
    value.serialize(&serializer).map_err(|e| error(Error::Internal(format!("cannot pass a result to the page: {e}"))))
}

/// A value from a plain object; a mismatch is a bad-input error naming `what`.
pub fn from_js<T: DeserializeOwned>(value: JsValue, what: &str) -> Result<T, JsValue> {
    serde_wasm_bindgen::from_value(value).map_err(|e| error(Error::input(format!("{what}: {e}"))))
}

/// Sets `object[key] = value`.
pub fn set(object: &Object, key: &str, value: impl Into<JsValue>) {
    Reflect::set(object, &JsValue::from_str(key), &value.into()).expect("setting a property of a fresh object");
}

/// `{ height, width, rgba: Uint8ClampedArray }` for a canvas `ImageData`.
pub fn picture(height: usize, width: usize, rgba: &[u8]) -> Object {
    let out = Object::new();
    set(&out, "height", height as u32);
    set(&out, "width", width as u32);
    set(&out, "rgba", Uint8ClampedArray::from(rgba));
    out
}

/// [`picture`] plus `values: Float64Array` (row-major pixel values, for read-outs).
pub fn picture_with_values(image: &Image, rgba: &[u8]) -> Object {
    let out = picture(image.height, image.width, rgba);
    set(&out, "values", Float64Array::from(image.pixels.as_slice()));
    out
}

//! The notebook's copy in this browser's own storage (IndexedDB), so a closed tab or a crash
//! loses nothing. Two records in one object store: `study`, the study file's text (without
//! the data), and `data`, the data file's bytes with their name and fingerprint (written only
//! when the file changes). The storage belongs to this browser profile on this machine;
//! nothing in it is sent anywhere, and the page's button clears it.

use js_sys::{Object, Promise, Reflect, Uint8Array};
use wasm_bindgen::prelude::*;
use wasm_bindgen_futures::JsFuture;
use web_sys::{IdbDatabase, IdbObjectStore, IdbRequest, IdbTransactionMode};

const DATABASE: &str = "spinney";
const STORE: &str = "notebook";

/// The data file kept beside the study.
pub struct KeptData {
    pub name: String,
    pub fingerprint: String,
    pub bytes: Uint8Array,
}

/// A request's result once it succeeds.
async fn done(request: &IdbRequest) -> Result<JsValue, JsValue> {
    let req = request.clone();
    let promise = Promise::new(&mut |resolve, reject| {
        let r = req.clone();
        let ok = Closure::once_into_js(move || {
            let _ = resolve.call1(&JsValue::NULL, &r.result().unwrap_or(JsValue::UNDEFINED));
        });
        let fail = Closure::once_into_js(move || {
            let _ = reject.call1(&JsValue::NULL, &"the browser's storage refused".into());
        });
        req.set_onsuccess(Some(ok.unchecked_ref()));
        req.set_onerror(Some(fail.unchecked_ref()));
    });
    JsFuture::from(promise).await
}

async fn open() -> Result<IdbDatabase, JsValue> {
    let factory = web_sys::window()
        .and_then(|w| w.indexed_db().ok().flatten())
        .ok_or_else(|| JsValue::from_str("this browser offers no storage here"))?;
    let request = factory.open_with_u32(DATABASE, 1)?;
    let req = request.clone();
    let upgrade = Closure::once_into_js(move || {
        if let Ok(db) = req.result().map(|d| d.unchecked_into::<IdbDatabase>()) {
            if !db.object_store_names().contains(STORE) {
                let _ = db.create_object_store(STORE);
            }
        }
    });
    request.set_onupgradeneeded(Some(upgrade.unchecked_ref()));
    Ok(done(&request).await?.unchecked_into())
}

fn store(db: &IdbDatabase, mode: IdbTransactionMode) -> Result<IdbObjectStore, JsValue> {
    db.transaction_with_str_and_mode(STORE, mode)?
        .object_store(STORE)
}

/// Keeps the study's text, and the data when given.
pub async fn save(study: &str, data: Option<&KeptData>) -> Result<(), JsValue> {
    let db = open().await?;
    let s = store(&db, IdbTransactionMode::Readwrite)?;
    if let Some(d) = data {
        let record = Object::new();
        Reflect::set(&record, &"name".into(), &d.name.as_str().into())?;
        Reflect::set(
            &record,
            &"fingerprint".into(),
            &d.fingerprint.as_str().into(),
        )?;
        Reflect::set(&record, &"bytes".into(), &d.bytes)?;
        done(&s.put_with_key(&record, &"data".into())?).await?;
    }
    done(&s.put_with_key(&study.into(), &"study".into())?).await?;
    db.close();
    Ok(())
}

/// The kept study and data, if any.
pub async fn load() -> Result<Option<(String, Option<KeptData>)>, JsValue> {
    let db = open().await?;
    let s = store(&db, IdbTransactionMode::Readonly)?;
    let study = done(&s.get(&"study".into())?).await?;
    let data = done(&s.get(&"data".into())?).await?;
    db.close();
    let Some(study) = study.as_string() else {
        return Ok(None);
    };
    let field = |k: &str| Reflect::get(&data, &k.into()).ok();
    let data = match (
        field("name").and_then(|v| v.as_string()),
        field("fingerprint").and_then(|v| v.as_string()),
        field("bytes").filter(|b| b.is_instance_of::<Uint8Array>()),
    ) {
        (Some(name), Some(fingerprint), Some(bytes)) => Some(KeptData {
            name,
            fingerprint,
            bytes: bytes.unchecked_into(),
        }),
        _ => None,
    };
    Ok(Some((study, data)))
}

/// Clears both records.
pub async fn forget() -> Result<(), JsValue> {
    let db = open().await?;
    let s = store(&db, IdbTransactionMode::Readwrite)?;
    done(&s.clear()?).await?;
    db.close();
    Ok(())
}
